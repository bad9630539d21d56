#include "support/test_paths.hpp"

namespace periodfit::test {
const char* periodfit_exe() { return PERIODFIT_EXE_PATH; }
const char* source_dir() { return PERIODFIT_SOURCE_DIR_PATH; }
const char* testdata_dir() { return PERIODFIT_SOURCE_DIR_PATH "/testdata"; }
}  // namespace periodfit::test

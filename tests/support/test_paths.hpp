#pragma once
// Where the tests find the built binary and the source tree. The absolute paths are compiled into
// one translation unit (test_paths.cpp) only, so the test sources themselves carry no
// machine-specific path: a fresh clone in another folder gets compiler-cache hits for them
// (DEVELOPERS.md, "Build and test").

namespace periodfit::test {
const char* periodfit_exe();   ///< the periodfit binary of this build tree
const char* source_dir();      ///< the project's source root
const char* testdata_dir();    ///< source_dir() + "/testdata"
}  // namespace periodfit::test

#define PERIODFIT_EXE (::periodfit::test::periodfit_exe())
#define PERIODFIT_SOURCE_DIR (::periodfit::test::source_dir())
#define PERIODFIT_TESTDATA_DIR (::periodfit::test::testdata_dir())

// The test runner's main: the process-wide handlers the CLI's main installs, so the library is
// tested as the CLI runs it (io::install_mapped_file_guard: read_csv maps files).
#define DOCTEST_CONFIG_IMPLEMENT
#include <doctest/doctest.h>

#include "io/mapped_file.hpp"

int main(int argc, char** argv) {
  periodfit::io::install_mapped_file_guard();
  doctest::Context context(argc, argv);
  return context.run();
}

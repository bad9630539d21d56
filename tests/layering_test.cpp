// The pipeline's layers (DEVELOPERS.md, "Layout"): a source in src/<stage>/ includes headers of
// its own stage and of earlier stages only. CMake links each stage's library to the one before
// it, so a back-edge would mostly fail to link — but an inline function or a template in a later
// stage's header links fine, so the includes themselves are checked here, every file of src/.
#include <doctest/doctest.h>

#include <algorithm>
#include <array>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <string_view>
#include <vector>

#include "support/test_paths.hpp"

namespace {

// The pipeline order, the same list as PERIODFIT_STAGES in CMakeLists.txt plus the driver.
constexpr std::array<std::string_view, 10> kStages = {"core",   "io",     "dsp",   "ident", "predict",
                                                      "output", "report", "store", "batch", "cli"};

/// Position of `stage` in the pipeline, or -1 for a folder that is not a stage.
int stage_rank(std::string_view stage) {
  const auto it = std::find(kStages.begin(), kStages.end(), stage);
  return it == kStages.end() ? -1 : static_cast<int>(it - kStages.begin());
}

/// The `#include "stage/…"` lines of `text` that reach a later stage (or a folder that is no
/// stage) than `stage`, each as "line N: #include "…"".
std::vector<std::string> layering_violations(std::string_view stage, const std::string& text) {
  std::vector<std::string> found;
  std::istringstream lines(text);
  std::string line;
  const int own = stage_rank(stage);
  for (int number = 1; std::getline(lines, line); ++number) {
    const auto first = line.find_first_not_of(" \t");
    if (first == std::string::npos || line.compare(first, 10, "#include \"") != 0) continue;
    const auto open = line.find('"', first);
    const auto slash = line.find('/', open);
    const auto close = line.find('"', open + 1);
    // An include without a folder ("harmonic_kernel.inc") is beside the including file.
    if (slash == std::string::npos || slash > close) continue;
    const int used = stage_rank(std::string_view(line).substr(open + 1, slash - open - 1));
    if (used < 0 || used > own) found.push_back("line " + std::to_string(number) + ": " + line);
  }
  return found;
}

std::string read_text(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

}  // namespace

TEST_CASE("layering: no source in src/ includes a header of a later stage") {
  const std::filesystem::path src = std::filesystem::path(PERIODFIT_SOURCE_DIR) / "src";
  REQUIRE(std::filesystem::is_directory(src));
  int files = 0;
  for (const auto& entry : std::filesystem::recursive_directory_iterator(src)) {
    if (!entry.is_regular_file()) continue;
    const auto relative = std::filesystem::relative(entry.path(), src);
    const std::string stage = relative.begin()->string();
    CHECK_MESSAGE(stage_rank(stage) >= 0, "src/", relative.string(), " is in no pipeline stage");
    for (const auto& violation : layering_violations(stage, read_text(entry.path())))
      FAIL_CHECK("src/", relative.string(), " ", violation);
    ++files;
  }
  // The tree holds well over a hundred sources; a count this low means the walk found nothing.
  CHECK(files > 100);
}

TEST_CASE("layering: heavy headers stay in the .cpp files of the stages that need them") {
  // DEVELOPERS.md, "Pay only for what you include": Eigen, FFTW, libsndfile and toml++ never in
  // a header (CLI11 only in the driver's); nlohmann/json only from the output stage on, whose
  // headers return JSON documents.
  const std::filesystem::path src = std::filesystem::path(PERIODFIT_SOURCE_DIR) / "src";
  for (const auto& entry : std::filesystem::recursive_directory_iterator(src)) {
    if (!entry.is_regular_file()) continue;
    const auto relative = std::filesystem::relative(entry.path(), src);
    const std::string stage = relative.begin()->string();
    const bool header = entry.path().extension() == ".hpp";
    std::istringstream lines(read_text(entry.path()));
    std::string line;
    while (std::getline(lines, line)) {
      if (line.rfind("#include <", 0) != 0) continue;
      const std::string_view name = std::string_view(line).substr(10);
      const bool heavy = name.starts_with("Eigen/") || name.starts_with("unsupported/") ||
                         name.starts_with("fftw3") || name.starts_with("sndfile") ||
                         name.starts_with("toml++/") || (name.starts_with("CLI/") && stage != "cli");
      if (header && heavy) FAIL_CHECK("src/", relative.string(), ": ", line);
      if (name.starts_with("nlohmann/") && stage_rank(stage) < stage_rank("output"))
        FAIL_CHECK("src/", relative.string(), ": ", line, " in a compute stage");
    }
  }
}

TEST_CASE("layering: the check rejects a back-edge and accepts earlier stages") {
  CHECK(layering_violations("dsp", "#include \"core/error.hpp\"\n#include \"io/info.hpp\"\n").empty());
  CHECK(layering_violations("cli", "#include \"batch/runner.hpp\"\n").empty());
  CHECK(layering_violations("dsp", "#include \"harmonic_kernel.inc\"\n").empty());
  CHECK(layering_violations("io", "#include <vector>\n  #include \"report/table.hpp\"\n") ==
        std::vector<std::string>{"line 2:   #include \"report/table.hpp\""});
  CHECK(layering_violations("output", "#include \"batch/runner.hpp\"\n").size() == 1);
  CHECK(layering_violations("core", "#include \"misc/helper.hpp\"\n").size() == 1);
}

TEST_CASE("layering: installed headers hold no test hook and include no internal header") {
  // cmake/InstallHeaders.cmake installs src/<stage>/*.hpp and *.inc, not their sub-folders: test
  // hooks live in src/<stage>/internal/ (issue 15: "test hooks leave the public headers"), and an
  // installed header that included one would not compile for a consumer.
  const std::filesystem::path src = std::filesystem::path(PERIODFIT_SOURCE_DIR) / "src";
  int headers = 0;
  for (const auto stage : kStages) {
    if (!std::filesystem::is_directory(src / stage)) continue;
    for (const auto& entry : std::filesystem::directory_iterator(src / stage)) {
      const auto ext = entry.path().extension();
      if (!entry.is_regular_file() || (ext != ".hpp" && ext != ".inc")) continue;
      ++headers;
      const std::string text = read_text(entry.path());
      const std::string name = std::string(stage) + "/" + entry.path().filename().string();
      CHECK_MESSAGE(text.find("for_testing") == std::string::npos, "src/", name, " declares a test hook");
      CHECK_MESSAGE(text.find("/internal/") == std::string::npos, "src/", name, " includes an internal header");
    }
  }
  CHECK(headers > 50);  // the stages hold well over fifty headers; fewer means the walk found nothing
}

TEST_CASE("layering: files are opened, stated, mapped, renamed and synced only through io::FileHandle") {
  // Issue 15, item 7: one RAII wrapper makes these OS calls, so every failure names its path
  // and no descriptor leaks on a throw. The two exceptions run inside signal handlers, where
  // only async-signal-safe calls may be made (no allocation for an error's path):
  // io/interrupt_cleanup.cpp (removing registered files) and io/mapped_file.cpp (the SIGBUS
  // guard, and the mapping itself, made on a FileHandle's descriptor).
  constexpr std::array<std::string_view, 8> kCalls = {"::open(",  "::openat(", "::fstat(", "::mmap(",
                                                      "::rename(", "renameat2(", "::fsync(", "::fdatasync("};
  constexpr std::array<std::string_view, 3> kAllowed = {"io/file_handle.cpp", "io/interrupt_cleanup.cpp",
                                                        "io/mapped_file.cpp"};
  const std::filesystem::path src = std::filesystem::path(PERIODFIT_SOURCE_DIR) / "src";
  int files = 0;
  for (const auto& entry : std::filesystem::recursive_directory_iterator(src)) {
    if (!entry.is_regular_file() || entry.path().extension() != ".cpp") continue;  // headers only mention them
    const std::string name = std::filesystem::relative(entry.path(), src).generic_string();
    if (std::find(kAllowed.begin(), kAllowed.end(), name) != kAllowed.end()) continue;
    ++files;
    const std::string text = read_text(entry.path());
    for (const auto call : kCalls)
      CHECK_MESSAGE(text.find(call) == std::string::npos, "src/", name, " calls ", call, " itself");
  }
  CHECK(files > 80);  // src/ holds well over eighty .cpp files; fewer means the walk found nothing
}

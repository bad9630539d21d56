// report.html in a real browser: Debian's chromium, headless, renders the batch report of a run
// with hostile file and channel names to PNG with no console message at all (no script error,
// no Content-Security-Policy violation, which an injected <script> would cause), and the DOM it
// builds holds every plot as inline SVG and no <script> element. A deliberately broken page is
// checked the same way first, so the console scan is known to catch errors.
// Skipped with a visible message when /usr/bin/chromium is absent (tools/deps.sh installs it).
#include <doctest/doctest.h>

#include <cstdlib>
#include <filesystem>
#include <string>

#include "batch_fixture.hpp"
#include "support/cli_runner.hpp"

using periodfit::test::run_cli;
using periodfit::test::slurp;
using periodfit::test::TempDir;
using periodfit::test::write_text;
namespace fs = std::filesystem;

namespace {

constexpr const char* kChromium = "/usr/bin/chromium";
// A stuck browser must not hang the suite (ctest's own timeout is 300 s).
constexpr int kBrowserTimeout_s = 120;

struct BrowserRun {
  int status = -1;
  std::string log;  ///< chromium's stderr (console messages appear as "…:CONSOLE(…)")
  std::string out;  ///< stdout (the DOM with --dump-dom)
};

// Headless chromium with a fresh profile; `action` is --screenshot=… or --dump-dom.
BrowserRun browse(const TempDir& dir, const std::string& url, const std::string& action, const std::string& tag) {
  const std::string profile = dir.file("profile_" + tag);
  const std::string log = dir.file("log_" + tag), out = dir.file("out_" + tag);
  const std::string cmd = "timeout " + std::to_string(kBrowserTimeout_s) + " " + kChromium +
                          " --headless --no-sandbox --disable-gpu --disable-background-networking"
                          " --no-first-run --disable-component-update --disable-sync"
                          " --hide-scrollbars --window-size=1280,2400 --enable-logging=stderr --v=0"
                          " --user-data-dir='" + profile + "' " + action + " '" + url + "' >'" + out +
                          "' 2>'" + log + "' </dev/null";
  BrowserRun r;
  r.status = std::system(cmd.c_str());
  r.log = slurp(log);
  r.out = slurp(out);
  return r;
}

// Lines of the log that report console output from the page.
std::string console_lines(const std::string& log) {
  std::string found;
  std::size_t start = 0;
  while (start < log.size()) {
    const std::size_t end = std::min(log.find('\n', start), log.size());
    const std::string line = log.substr(start, end - start);
    if (line.find(":CONSOLE") != std::string::npos || line.find("Uncaught") != std::string::npos)
      found += line + "\n";
    start = end + 1;
  }
  return found;
}

std::size_t count(const std::string& text, const std::string& what) {
  std::size_t n = 0;
  for (std::size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + 1)) ++n;
  return n;
}

}  // namespace

TEST_CASE("report: report.html renders in headless chromium without console messages") {
  if (!fs::exists(kChromium)) {
    MESSAGE("chromium is not installed (Debian package chromium, in tools/deps.sh): browser check skipped");
    return;
  }
  TempDir dir("report_browser");

  // Negative control: a page with a script error must be caught by the console scan.
  write_text(dir.file("broken.html"),
             "<!DOCTYPE html><html><body><script>undefinedFunction();</script></body></html>\n");
  const BrowserRun control = browse(dir, "file://" + dir.file("broken.html"), "--dump-dom", "control");
  REQUIRE_MESSAGE(control.status == 0, control.log);
  CHECK(console_lines(control.log).find("undefinedFunction") != std::string::npos);

  // A batch with a hostile channel name, a hostile file name, a failing and a corrupt file.
  fs::create_directories(dir.path / "in");
  periodfit::test::LowpassCapture good;
  good.input_name = "<script>alert(1)</script>";
  periodfit::test::write_lowpass_csv(dir.file("in/a&b \"q\" 'x'.csv"), good);
  periodfit::test::LowpassCapture off = good;
  off.fn_hz = 1250;
  off.seed = 5;
  periodfit::test::write_lowpass_csv(dir.file("in/off.csv"), off);
  write_text(dir.file("in/corrupt.wav"), "RIFF\x10");
  write_text(dir.file("limits.toml"), periodfit::test::lowpass_config());
  const auto batch = run_cli("batch '" + dir.file("in") + "' --config '" + dir.file("limits.toml") +
                             "' --report '" + dir.file("out") + "' -q");
  REQUIRE(batch.exit_code == 2);
  const std::string report = dir.file("out/report.html");

  const std::string png = dir.file("report.png");
  const BrowserRun shot = browse(dir, "file://" + report, "--screenshot='" + png + "'", "shot");
  REQUIRE_MESSAGE(shot.status == 0, shot.log);
  CHECK_MESSAGE(console_lines(shot.log).empty(), console_lines(shot.log));
  REQUIRE(fs::exists(png));
  const std::string bytes = slurp(png);
  CHECK(bytes.rfind("\x89PNG\r\n\x1a\n", 0) == 0);  // PNG signature (RFC 2083)
  // A blank 1280×2400 page compresses to about 10 kB; tables and plots make it far larger.
  constexpr std::size_t kRenderedPageMinBytes = 60000;
  CHECK(bytes.size() > kRenderedPageMinBytes);

  const BrowserRun dom = browse(dir, "file://" + report, "--dump-dom", "dom");
  REQUIRE(dom.status == 0);
  CHECK(console_lines(dom.log).empty());
  CHECK(count(dom.out, "<script") == 0);
  // Two files were analysed: three inline SVG plots each (Bode, spectrum, waveform); the
  // cross-board view adds a histogram per limit (three) and the overlay of the responses.
  CHECK(count(dom.out, "<svg ") == 6 + 3 + 1);
  CHECK(dom.out.find("&lt;script&gt;alert(1)&lt;/script&gt;") != std::string::npos);
}

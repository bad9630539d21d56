// The batch report page (report/html_report.hpp) written two ways: in memory by
// render_html_report, and streamed as `periodfit batch` writes it (each file's section rendered
// on its own into an io::ScratchFile as its worker finishes, in any order; the page then written
// through an io::AtomicFile from the overview rows and the spilled sections). The two must be
// the same bytes, so a report does not depend on how it was assembled.
#include <doctest/doctest.h>

#include <cstddef>
#include <numbers>
#include <string>
#include <vector>

#include "batch/config.hpp"
#include "batch/file_analysis.hpp"
#include "batch_fixture.hpp"
#include "core/number_format.hpp"
#include "io/output_file.hpp"
#include "io/scratch_file.hpp"
#include "report/html_report.hpp"
#include "report/figures.hpp"
#include "report/svg_plot.hpp"
#include "support/cli_runner.hpp"
#include "support/lowpass_bode.hpp"
#include "support/code_table.hpp"

using namespace periodfit;
using namespace periodfit::report;

namespace {

const std::string kHostile = "<script>alert(1)</script> & \"q\" 'a'";

/// A real render_svg element of realistic size: the Bode figure of support/lowpass_bode.hpp
/// on 40 harmonics.
std::string bode_svg(const std::string& id) {
  BodePlotData b = test::lowpass_bode_data(kHostile, 79);
  b.id = id;
  return render_svg(bode_figure(b));
}

/// Three files as a batch reports them: PASS with plots (together larger than the 64 KiB
/// copy buffers of ScratchFile and AtomicFile), FAIL with two failing limits, ERROR with its
/// message; user strings hostile throughout.
ReportDocument sample_document() {
  ReportDocument doc;
  doc.title = "line 3 " + kHostile;
  doc.settings = {{"mode", "frf"}, {"config", "limits & more.toml"}, {"plots", "all"}};
  ReportFile pass;
  pass.path = "captures/unit_0001.wav";
  pass.status = FileStatus::pass;
  pass.key_results = "f0 100.0 Hz \xC2\xB7 order 0/2";
  pass.results = {{"natural_frequency_hz", "1200.3 \xC2\xB1 0.4"}, {"damping", "0.501"}};
  pass.limits = {{"damping of pole 1", "0.501", "0.5 \xC2\xB1 0.05", "pass", false}};
  pass.metadata = {{"channel 0", kHostile}};
  for (int k = 1; k <= 4; ++k) pass.plots.push_back(bode_svg("f1-" + std::to_string(k)));
  ReportFile fail;
  fail.path = "captures/" + kHostile + ".csv";
  fail.status = FileStatus::fail;
  fail.key_results = "f0 99.9 Hz";
  fail.failing = {"damping of pole 1 = 0.61, allowed 0.5 \xC2\xB1 0.05", "dc_gain = 2, allowed 1 \xC2\xB1 0.1"};
  fail.limits = {{"damping of pole 1", "0.61", "0.5 \xC2\xB1 0.05", "fail: outside the range", true},
                 {"dc_gain", "2", "1 \xC2\xB1 0.1", "fail: outside the range", true}};
  fail.messages = {"nonlinear: harmonic 3 of the output is not excited"};
  fail.plots.push_back(bode_svg("f2-1"));
  ReportFile error;
  error.path = "captures/broken.wav";
  error.status = FileStatus::error;
  error.messages = {"captures/broken.wav: truncated <data> chunk"};
  doc.files = {pass, fail, error};
  return doc;
}

}  // namespace

TEST_CASE("html report: the page streamed from spilled sections equals the in-memory rendering") {
  const ReportDocument doc = sample_document();
  const std::string in_memory = render_html_report(doc);
  REQUIRE(doc.files[0].plots.size() == 4);
  std::size_t first_plots = 0;
  for (const auto& svg : doc.files[0].plots) first_plots += svg.size();
  REQUIRE(first_plots > std::size_t{1 << 16});  // the copy loops take more than one piece

  test::TempDir dir("html_report_stream");
  ReportOverview overview;
  overview.title = doc.title;
  overview.settings = doc.settings;
  std::vector<io::ScratchFile::Span> spans(doc.files.size());
  {
    io::ScratchFile spill(dir.path.string());
    // Sections reach the spill file in reverse order, as workers finishing late files first.
    for (std::size_t i = doc.files.size(); i-- > 0;)
      spans[i] = spill.append(render_report_section(doc.files[i], i + 1));
    for (const auto& f : doc.files) overview.rows.push_back(report_row(f));
    io::AtomicFile page(dir.file("report.html"));
    write_html_report(
        overview, [&](std::size_t i, const HtmlSink& sink) { spill.copy(spans[i], sink); },
        [&](std::string_view bytes) { page.write(bytes); });
    page.commit();
  }
  const std::string streamed = io::read_file(dir.file("report.html"));
  CHECK(streamed.size() == in_memory.size());
  CHECK(streamed == in_memory);

  // What both must contain, independently of how they were made: the overview before the
  // sections, sections in report order, the error message in the overview, hostile text
  // escaped, the page closed.
  const auto at = [&](const std::string& s) { return in_memory.find(s); };
  REQUIRE(at("<h2 id=\"overview\">") != std::string::npos);
  CHECK(at("<h2 id=\"overview\">") < at("<h2 id=\"file-1\">"));
  CHECK(at("<h2 id=\"file-1\">") < at("<h2 id=\"file-2\">"));
  CHECK(at("<h2 id=\"file-2\">") < at("<h2 id=\"file-3\">"));
  CHECK(at("<h2 id=\"file-3\">") < at("<footer>"));
  CHECK(at("3 files</p>") != std::string::npos);
  CHECK(at("<td class=\"msg\">captures/broken.wav: truncated &lt;data&gt; chunk</td>") != std::string::npos);
  CHECK(at("damping of pole 1 = 0.61, allowed 0.5 \xC2\xB1 0.05<br>dc_gain = 2") != std::string::npos);
  CHECK(at("<script") == std::string::npos);
  CHECK(in_memory.ends_with("</body>\n</html>\n"));
}

TEST_CASE("html report: a section renders on its own with its number as anchor") {
  const ReportDocument doc = sample_document();
  const std::string section = render_report_section(doc.files[1], 7);
  CHECK(section.starts_with("<section>\n<h2 id=\"file-7\">7. captures/&lt;script&gt;"));
  CHECK(section.ends_with("<p><a href=\"#overview\">back to the overview</a></p>\n</section>\n"));
  CHECK(section.find("id=\"f2-1-title\"") != std::string::npos);  // its plot, inline
  CHECK(section.find("<tr class=\"failed\">") != std::string::npos);
  const ReportRow row = report_row(doc.files[2]);
  CHECK(row.error == "captures/broken.wav: truncated <data> chunk");
  CHECK(report_row(doc.files[1]).error.empty());  // only ERROR rows show a message
}

TEST_CASE("html report: key results state u as the terminal does, the natural frequency in Hz") {
  // Issue 13: the report showed dc gain ± (95 % half-width) and the terminal ± u; both now give
  // the standard uncertainty, labelled, with GUM 7.2.6 digits, f_n = ω_n/2π in Hz.
  const test::TempDir dir("html_key_results_u");
  test::LowpassCapture c;
  test::write_lowpass_csv(dir.file("board.csv"), c);
  const batch::FileAnalysis a = batch::analyse_file(dir.file("board.csv"),
                                                    batch::parse_batch_config(test::lowpass_config(), "t.toml"));
  const auto& model = a.result_json["model"];
  const auto& pole = model["poles"][0];
  const double to_hz = 1 / (2 * std::numbers::pi);
  std::string dc_gain, pole_row;
  for (const auto& row : a.result_rows) {
    if (row.first == "dc gain") dc_gain = row.second;
    if (row.first == "pole 1") pole_row = row.second;
  }
  CHECK(dc_gain == format_with_u(model["dc_gain"].get<double>(), model["dc_gain_u"].get<double>()));
  CHECK(pole_row.rfind("complex pair: natural frequency " +
                           format_with_u(pole["natural_frequency_rad_s"].get<double>() * to_hz,
                                             pole["natural_frequency_u_rad_s"].get<double>() * to_hz, "Hz") +
                           ", ",
                       0) == 0);
  for (const auto& row : a.result_rows) CHECK(row.second.find("\xC2\xB1") == std::string::npos);
}

TEST_CASE("html report: the cross-board view has a column per limit coloured by margin, a histogram per limit and the overlay") {
  report::CrossBoardView v;
  v.limits = {{"damping at pole 1", "0.45 … 0.55", "", 0.45, 0.55, false}, {"linear", "yes", "", 0, 0, true}};
  // Board 1 in the middle (margin 40 % of the width), board 2 close to a bound (5 %), board 3 out,
  // board 4 not evaluated (an ERROR file).
  v.cells = {{{true, true, 0.49, 0.4, "pass"}, {true, true, 1, NAN, "pass"}},
             {{true, true, 0.545, 0.05, "pass"}, {true, true, 1, NAN, "pass"}},
             {{true, false, 0.62, -0.7, "fail"}, {true, false, 0, NAN, "fail"}},
             {{}, {}}};
  v.x_quantity = "frequency";
  v.x_unit = "Hz";
  v.x_log = true;
  v.y_quantity = "|H|";
  v.y_unit = "dB";
  v.responses = {{{100, 1000, 4000}, {0, -1, -20}, true}, {{100, 1000, 4000}, {0.1, -0.5, -18.5}, false}, {}, {}};
  v.response_limits = {{4000, -INFINITY, -18}};
  const std::string html = report::render_cross_board(v, {"a.csv", "b.csv", "c.csv", "d.csv"});
  const auto count = [&](const std::string& needle) {
    std::size_t n = 0;
    for (auto at = html.find(needle); at != std::string::npos; at = html.find(needle, at + 1)) ++n;
    return n;
  };
  CHECK(count("<th>damping at pole 1") == 1);
  CHECK(count("<th>linear") == 1);
  CHECK(count("num m-pass\"") == 3);    // board 1 (both), board 2's yes/no
  CHECK(count("num m-narrow\"") == 1);  // board 2's damping: 5 % < 10 % left
  CHECK(count("num m-fail\"") == 2);
  CHECK(count("num m-none\"") == 2);
  CHECK(html.find(">0.545<") != std::string::npos);
  CHECK(html.find(">no<") != std::string::npos);
  // One histogram (the yes/no limit has none) and the overlay.
  CHECK(count("<svg") == 2);
  CHECK(html.find("every board") != std::string::npos);
  CHECK(report::render_cross_board({}, {}).empty());
}

TEST_CASE("html report: each file status has its own text, docs/batch-output.md lists them, and it reads back") {
  const auto c = test::codes_of(FileStatus::error, [](FileStatus s) { return std::string(status_text(s)); });
  CHECK(test::distinct(c));
  test::check_documented(c, "batch-output.md", "| `status` |", "`", "`");
  for (FileStatus s : {FileStatus::pass, FileStatus::fail, FileStatus::error}) {
    CAPTURE(status_text(s));
    CHECK(file_status_from(status_text(s)) == s);
  }
  CHECK(!file_status_from("pass").has_value());  // the database's text is compared exactly
  CHECK(!file_status_from("").has_value());
}

#pragma once
/// The batch report as one self-contained HTML page: inline CSS and inline SVG only, no
/// scripts, no fonts or images from elsewhere (a Content-Security-Policy in the page forbids
/// them too), so it can be archived and opened offline. Layout: the run's totals and settings,
/// an overview table (file, status, key results, failing limits with the measured value) whose
/// rows link to a section per file with its results, limits, messages and plots.
///
/// Every string that came from a user or a file (paths, channel names, metadata, messages) is
/// escaped with xml_escape; the SVG fragments are trusted output of report::render_svg.
///
/// Two ways to the same bytes: render_html_report(document) returns the page as one string;
/// for a report too large to hold (a batch of thousands of files with plots), each file's
/// section is rendered on its own as soon as the file is done (render_report_section) and
/// stored wherever the caller likes, and write_html_report streams the page to a sink, taking
/// only the overview rows in memory and asking for each section in turn.
///
/// Usage (streaming):
///   sections[i] = render_report_section(file_i, i + 1);    // as each file finishes
///   write_html_report(overview, [&](std::size_t i, const HtmlSink& s) { s(sections[i]); },
///                     [&](std::string_view bytes) { out.write(bytes); });
#include <cstddef>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "report/cross_board.hpp"

namespace periodfit::report {

enum class FileStatus { pass, fail, error };

/// "PASS", "FAIL", "ERROR".
const char* status_text(FileStatus status);

/// The status whose status_text is `text`, or nullopt: the reverse of status_text, for statuses
/// read back from a shard file or the results database (a foreign row may hold other text).
std::optional<FileStatus> file_status_from(std::string_view text);

/// One limit as shown in a file's section.
struct ReportLimit {
  std::string name;      ///< e.g. "mag_db at harmonic 3 (v_in → v_out)"
  std::string measured;  ///< e.g. "−3.021 ± 0.012"
  std::string allowed;   ///< e.g. "−3 ± 0.5 (guard band: 95 % interval inside)"
  std::string verdict;   ///< "pass", "fail", or why it could not be evaluated
  bool failed = false;
};

struct ReportFile {
  std::string path;
  FileStatus status = FileStatus::pass;
  std::string key_results;  ///< one line for the overview table
  std::vector<std::string> failing;  ///< one entry per failing flag and failing limit, with its measured value
  std::vector<std::string> flags;    ///< every flag with its severity: "v_out: clipped (invalidates)"
  std::vector<std::pair<std::string, std::string>> results;   ///< result name → value text
  std::vector<ReportLimit> limits;
  std::vector<std::string> messages;  ///< the error message, warnings and flags
  std::vector<std::pair<std::string, std::string>> metadata;  ///< from the capture
  std::vector<std::string> plots;  ///< `<svg>` elements from render_svg
};

struct ReportDocument {
  std::string title = "periodfit batch report";
  std::vector<std::pair<std::string, std::string>> settings;  ///< shown under the title
  std::vector<ReportFile> files;  ///< in report order
};

/// What the overview table shows of one file: all the page needs of it besides its section.
struct ReportRow {
  std::string path;
  FileStatus status = FileStatus::pass;
  std::string key_results;
  std::vector<std::string> failing;  ///< as ReportFile::failing
  std::vector<std::string> flags;    ///< as ReportFile::flags
  std::string error;                 ///< shown for an ERROR file: its first message
};

/// The row of `file` in the overview table.
ReportRow report_row(const ReportFile& file);

/// The page without its per-file sections.
struct ReportOverview {
  std::string title = "periodfit batch report";
  std::vector<std::pair<std::string, std::string>> settings;  ///< shown under the title
  std::vector<ReportRow> rows;  ///< in report order
  CrossBoardView boards;        ///< every board against every limit (report/cross_board.hpp)
};

/// Receives the page's bytes in order, in pieces of any size.
using HtmlSink = std::function<void(std::string_view)>;

/// The `<section>` of one file. `number` is its 1-based position in report order; the overview
/// links to it as `#file-<number>`.
std::string render_report_section(const ReportFile& file, std::size_t number);

/// render_report_section in two parts, heading + body: the heading carries the number, the body
/// does not (its plots' element ids must not depend on the number either), so a body rendered
/// by one process can be placed at any position of a page another process writes (batch
/// shards gathered into one report, batch/shard.hpp).
std::string render_section_heading(const std::string& path, FileStatus status, std::size_t number);
std::string render_section_body(const ReportFile& file);

/// Streams the page to `sink`: head, totals, settings and the overview table from `overview`,
/// then, for i = 0 … rows − 1 in order, `write_section(i, sink)`, which must pass the bytes of
/// render_report_section(file i, i + 1) to the sink it is given, then the footer.
void write_html_report(const ReportOverview& overview,
                       const std::function<void(std::size_t, const HtmlSink&)>& write_section,
                       const HtmlSink& sink);

/// The whole page as one string, the same bytes as write_html_report. Takes the document by
/// value and releases each file's plots once its section is rendered, so the page is held in
/// memory about once, not twice.
std::string render_html_report(ReportDocument document);

}  // namespace periodfit::report

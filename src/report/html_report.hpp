#pragma once
/// The batch report as one self-contained HTML page: inline CSS and inline SVG only, no
/// scripts, no fonts or images from elsewhere (a Content-Security-Policy in the page forbids
/// them too), so it can be archived and opened offline. Layout: the run's totals and settings,
/// an overview table (file, status, key results, failing limits with the measured value) whose
/// rows link to a section per file with its results, limits, messages and plots.
///
/// Every string that came from a user or a file (paths, channel names, metadata, messages) is
/// escaped with xml_escape; the SVG fragments are trusted output of report::render_svg.
#include <string>
#include <utility>
#include <vector>

namespace periodfit::report {

enum class FileStatus { pass, fail, error };

/// "PASS", "FAIL", "ERROR".
const char* status_text(FileStatus status);

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
  std::vector<std::string> failing;  ///< one entry per failing limit, with its measured value
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

/// The whole page. Takes the document by value and releases each file's plots once they are
/// copied into the page, so a large report is held in memory about once, not twice.
std::string render_html_report(ReportDocument document);

}  // namespace periodfit::report

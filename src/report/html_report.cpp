#include "report/html_report.hpp"

#include <array>

#include "report/svg_plot.hpp"

namespace periodfit::report {

namespace {

// Inline style sheet: system sans-serif fonts only, readable in print and on screen.
constexpr const char* kStyle = R"css(
:root { --pass: #1d7a36; --fail: #b3261e; --error: #8a5a00; --rule: #d9d9d9; }
* { box-sizing: border-box; }
body { font-family: sans-serif; font-size: 14px; line-height: 1.45; color: #1b1b1b;
       margin: 0 auto; padding: 20px 28px 60px; max-width: 1180px; background: #ffffff; }
h1 { font-size: 22px; margin: 0 0 6px; }
h2 { font-size: 17px; margin: 34px 0 8px; padding-top: 12px; border-top: 2px solid var(--rule);
     overflow-wrap: anywhere; }
h3 { font-size: 14px; margin: 18px 0 6px; }
.totals { font-size: 16px; margin: 6px 0 14px; }
.totals span { margin-right: 18px; font-weight: bold; }
.totals .pass { color: var(--pass); } .totals .fail { color: var(--fail); }
.totals .error { color: var(--error); }
table { border-collapse: collapse; margin: 6px 0 10px; }
th, td { text-align: left; vertical-align: top; padding: 4px 10px; border-bottom: 1px solid var(--rule); }
th { background: #f3f3f3; font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.path { white-space: nowrap; }
td.msg { overflow-wrap: anywhere; }
table.overview { width: 100%; }
.badge { display: inline-block; min-width: 52px; text-align: center; padding: 1px 6px;
         border-radius: 3px; color: #ffffff; font-weight: bold; font-size: 12px; }
.badge.pass { background: var(--pass); } .badge.fail { background: var(--fail); }
.badge.error { background: var(--error); }
tr.failed td { color: var(--fail); }
ul.messages { margin: 4px 0; padding-left: 20px; }
ul.messages li { overflow-wrap: anywhere; }
.settings td:first-child, .kv td:first-child { color: #555555; }
.plots { display: flex; flex-wrap: wrap; gap: 12px; }
.plots svg { max-width: 100%; height: auto; border: 1px solid #eeeeee; }
a { color: #1f5fa8; }
table.boards td.m-pass { background: #e3f3e6; } table.boards td.m-narrow { background: #fbeccc; }
table.boards td.m-fail { background: #f8d9d6; color: var(--fail); } table.boards td.m-none { background: #eeeeee; }
p.legend span { padding: 1px 6px; margin-right: 6px; } p.legend .m-pass { background: #e3f3e6; }
p.legend .m-narrow { background: #fbeccc; } p.legend .m-fail { background: #f8d9d6; } p.legend .m-none { background: #eeeeee; }
footer { margin-top: 40px; color: #666666; font-size: 12px; }
@media print { h2 { page-break-before: always; } .plots svg { border: none; } }
)css";

std::string cls(FileStatus status) {
  switch (status) {
    case FileStatus::pass: return "pass";
    case FileStatus::fail: return "fail";
    case FileStatus::error: return "error";
  }
  return "error";
}

std::string badge(FileStatus status) {
  return "<span class=\"badge " + cls(status) + "\">" + status_text(status) + "</span>";
}

std::string key_value_table(const std::vector<std::pair<std::string, std::string>>& rows,
                            const char* css_class) {
  std::string out = std::string("<table class=\"") + css_class + "\">\n";
  for (const auto& [key, value] : rows)
    out += "<tr><td>" + xml_escape(key) + "</td><td>" + xml_escape(value) + "</td></tr>\n";
  return out + "</table>\n";
}

}  // namespace

const char* status_text(FileStatus status) {
  switch (status) {
    case FileStatus::pass: return "PASS";
    case FileStatus::fail: return "FAIL";
    case FileStatus::error: return "ERROR";
  }
  return "ERROR";
}

std::optional<FileStatus> file_status_from(std::string_view text) {
  for (FileStatus s : {FileStatus::pass, FileStatus::fail, FileStatus::error})
    if (text == status_text(s)) return s;
  return std::nullopt;
}

ReportRow report_row(const ReportFile& file) {
  ReportRow row;
  row.path = file.path;
  row.status = file.status;
  row.key_results = file.key_results;
  row.failing = file.failing;
  row.flags = file.flags;
  if (file.status == FileStatus::error && !file.messages.empty()) row.error = file.messages.front();
  return row;
}

std::string render_report_section(const ReportFile& f, std::size_t number) {
  return render_section_heading(f.path, f.status, number) + render_section_body(f);
}

std::string render_section_heading(const std::string& path, FileStatus status, std::size_t number) {
  return "<section>\n<h2 id=\"file-" + std::to_string(number) + "\">" + std::to_string(number) +
         ". " + xml_escape(path) + " " + badge(status) + "</h2>\n";
}

std::string render_section_body(const ReportFile& f) {
  std::size_t plot_bytes = 0;
  for (const auto& svg : f.plots) plot_bytes += svg.size();
  std::string html;
  // The plots dominate; tables and text take a few kB.
  html.reserve(plot_bytes + 8192);
  if (!f.messages.empty()) {
    html += "<h3>Messages</h3>\n<ul class=\"messages\">\n";
    for (const auto& m : f.messages) html += "<li>" + xml_escape(m) + "</li>\n";
    html += "</ul>\n";
  }
  if (!f.limits.empty()) {
    html += "<h3>Limits</h3>\n<table class=\"limits\">\n<thead><tr><th>limit</th><th>measured"
            "</th><th>allowed</th><th>verdict</th></tr></thead>\n<tbody>\n";
    for (const auto& l : f.limits)
      html += std::string(l.failed ? "<tr class=\"failed\">" : "<tr>") + "<td>" +
              xml_escape(l.name) + "</td><td class=\"num\">" + xml_escape(l.measured) +
              "</td><td class=\"num\">" + xml_escape(l.allowed) + "</td><td>" +
              xml_escape(l.verdict) + "</td></tr>\n";
    html += "</tbody>\n</table>\n";
  }
  if (!f.results.empty()) {
    html += "<h3>Results</h3>\n" + key_value_table(f.results, "kv");
  }
  if (!f.plots.empty()) {
    html += "<h3>Plots</h3>\n<div class=\"plots\">\n";
    for (const auto& svg : f.plots) html += svg;
    html += "</div>\n";
  }
  if (!f.metadata.empty()) html += "<h3>Capture metadata</h3>\n" + key_value_table(f.metadata, "kv");
  html += "<p><a href=\"#overview\">back to the overview</a></p>\n</section>\n";
  return html;
}

void write_html_report(const ReportOverview& overview,
                       const std::function<void(std::size_t, const HtmlSink&)>& write_section,
                       const HtmlSink& sink) {
  std::array<std::size_t, 3> counts{};
  for (const auto& row : overview.rows) ++counts[static_cast<std::size_t>(row.status)];

  std::string html;
  html += "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n";
  // No scripts, no network: even an injected tag could not run or fetch anything.
  html += "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; "
          "style-src 'unsafe-inline'; img-src data:\">\n";
  html += "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n";
  html += "<title>" + xml_escape(overview.title) + "</title>\n<style>" + kStyle + "</style>\n";
  html += "</head>\n<body>\n";
  html += "<h1>" + xml_escape(overview.title) + "</h1>\n";
  html += "<p class=\"totals\"><span class=\"pass\">" + std::to_string(counts[0]) +
          " pass</span><span class=\"fail\">" + std::to_string(counts[1]) +
          " fail</span><span class=\"error\">" + std::to_string(counts[2]) + " error</span>" +
          std::to_string(overview.rows.size()) + " files</p>\n";
  if (!overview.settings.empty()) html += key_value_table(overview.settings, "settings");

  html += "<h2 id=\"overview\">Overview</h2>\n<table class=\"overview\">\n<thead><tr><th>#</th>"
          "<th>file</th><th>status</th><th>key results</th><th>flags</th><th>failing flags and limits (measured)</th>"
          "</tr></thead>\n<tbody>\n";
  sink(html);
  for (std::size_t i = 0; i < overview.rows.size(); ++i) {
    const auto& f = overview.rows[i];
    html = "<tr><td class=\"num\">" + std::to_string(i + 1) + "</td><td class=\"path\"><a href=\"#file-" +
           std::to_string(i + 1) + "\">" + xml_escape(f.path) + "</a></td><td>" + badge(f.status) +
           "</td><td>" + xml_escape(f.key_results) + "</td><td class=\"msg\">";
    for (std::size_t k = 0; k < f.flags.size(); ++k) html += (k ? "<br>" : "") + xml_escape(f.flags[k]);
    html += "</td><td class=\"msg\">";
    for (std::size_t k = 0; k < f.failing.size(); ++k)
      html += (k ? "<br>" : "") + xml_escape(f.failing[k]);
    html += xml_escape(f.error);
    html += "</td></tr>\n";
    sink(html);
  }
  sink("</tbody>\n</table>\n");
  {
    std::vector<std::string> paths;
    paths.reserve(overview.rows.size());
    for (const auto& row : overview.rows) paths.push_back(row.path);
    sink(render_cross_board(overview.boards, paths));
  }

  for (std::size_t i = 0; i < overview.rows.size(); ++i) write_section(i, sink);
  sink("<footer>Written by periodfit " + xml_escape(PERIODFIT_VERSION) +
       ". Uncertainties are 95 % intervals unless stated otherwise.</footer>\n");
  sink("</body>\n</html>\n");
}

std::string render_html_report(ReportDocument document) {
  ReportOverview overview;
  overview.title = std::move(document.title);
  overview.settings = std::move(document.settings);
  for (const auto& f : document.files) overview.rows.push_back(report_row(f));
  std::size_t plot_bytes = 0;
  for (const auto& f : document.files)
    for (const auto& svg : f.plots) plot_bytes += svg.size();

  std::string html;
  // The plots dominate; tables and text take a few kB per file.
  html.reserve(plot_bytes + 65536 + 8192 * document.files.size());
  const HtmlSink append = [&](std::string_view bytes) { html.append(bytes); };
  write_html_report(
      overview,
      [&](std::size_t i, const HtmlSink& sink) {
        sink(render_report_section(document.files[i], i + 1));
        std::vector<std::string>().swap(document.files[i].plots);  // in the page now: release
      },
      append);
  return html;
}

}  // namespace periodfit::report

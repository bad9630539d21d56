// Renderings of a ProductionReport (store/production.hpp): text, CSV, JSON and HTML. The
// statistics are computed by production_report(); nothing here computes a number beyond
// arranging it for display.
#include <algorithm>
#include <cmath>
#include <ctime>
#include <nlohmann/json.hpp>

#include "output/json_writer.hpp"
#include "core/number_format.hpp"
#include "report/cross_board.hpp"
#include "report/html_report.hpp"
#include "core/safe_text.hpp"
#include "report/svg_plot.hpp"
#include "core/table.hpp"
#include "store/production.hpp"

namespace periodfit::store {

using json = nlohmann::ordered_json;

namespace {

std::string num(double v, int digits = 4) { return std::isfinite(v) ? format_significant(v, digits) : "-"; }
std::string csv_num(double v) { return std::isfinite(v) ? format_shortest(v) : ""; }
json json_num(double v) { return std::isfinite(v) ? output::json_number(v) : json(nullptr); }

std::string ci_text(double value, double lo, double hi, double level) {
  if (!std::isfinite(value)) return "-";
  return num(value, 3) + " (" + format_shortest(level * 100) + " %: " + num(lo, 3) + " … " + num(hi, 3) + ")";
}

// An index with its interval where the capability is defined, else the status's code saying why not.
std::string index_text(const Capability& c, double value, double lo, double hi) {
  return c.status == StatisticStatus::ok ? ci_text(value, lo, hi, c.confidence) : std::string(code(c.status));
}

std::string selection_text(const ProductionQuery& q) {
  std::string s;
  const auto add = [&](const char* name, const std::string& v) {
    if (!v.empty()) s += (s.empty() ? "" : ", ") + std::string(name) + " " + v;
  };
  add("since", q.since);
  add("until", q.until);
  add("station", q.station);
  add("lot", q.lot);
  add("serial", q.serial);
  add("limit", q.limit);
  return s.empty() ? "all tests" : s;
}

// Seconds since the Unix epoch of an ISO 8601 UTC text written by store/clock (NaN if not one).
double epoch_s(const std::string& t) {
  std::tm tm{};
  int ms = 0;
  if (std::sscanf(t.c_str(), "%4d-%2d-%2dT%2d:%2d:%2d.%3d", &tm.tm_year, &tm.tm_mon, &tm.tm_mday, &tm.tm_hour,
                  &tm.tm_min, &tm.tm_sec, &ms) < 6)
    return std::nan("");
  tm.tm_year -= 1900;
  tm.tm_mon -= 1;
  return static_cast<double>(timegm(&tm)) + ms / 1000.0;
}

}  // namespace

std::string production_text(const ProductionReport& r) {
  std::string out = "results database " + r.database + "\nselection: " + selection_text(r.query) + "\n";
  out += "tests: " + std::to_string(r.captures) + " (" + std::to_string(r.passed) + " pass, " +
         std::to_string(r.failed) + " fail, " + std::to_string(r.errors) + " error)";
  if (r.captures > 0)
    out += ", yield " + format_fixed(100 * r.yield, 1) + " %, " + r.first_test + " … " + r.last_test;
  out += "\n";
  if (!r.limits.empty()) {
    Table t({{"limit", Table::Align::left},
                     {"allowed", Table::Align::left},
                     {"n", Table::Align::right},
                     {"fail", Table::Align::right},
                     {"mean", Table::Align::right},
                     {"s", Table::Align::right},
                     {"Cp (CI)", Table::Align::left},
                     {"Cpk (CI)", Table::Align::left},
                     {"chart signals", Table::Align::left}});
    for (const auto& s : r.limits) {
      const Capability& c = s.capability;
      std::string signals = s.chart.signals.empty() ? "none" : std::to_string(s.chart.signals.size());
      if (!s.chart.signals.empty()) {
        std::vector<int> rules;
        for (const auto& g : s.chart.signals)
          if (std::find(rules.begin(), rules.end(), g.rule) == rules.end()) rules.push_back(g.rule);
        signals += " (rules";
        for (int rule : rules) signals += " " + std::to_string(rule);
        signals += ")";
      }
      t.add_row({terminal_text(s.key, false), terminal_text(s.allowed, false), std::to_string(c.n),
                 std::to_string(s.failed), num(c.mean), num(c.sd, 3),
                 index_text(c, c.cp, c.cp_lo, c.cp_hi),
                 index_text(c, c.cpk, c.cpk_lo, c.cpk_hi), signals});
    }
    out += "\n" + t.render();
    for (const auto& s : r.limits) {
      if (s.chart.status != StatisticStatus::ok) continue;
      out += "\n" + terminal_text(s.key, false) + ": individuals chart centre " + num(s.chart.centre) +
             ", limits " + num(s.chart.lcl) + " … " + num(s.chart.ucl) + ", MR̄ " + num(s.chart.mr_bar) +
             " (MR UCL " + num(s.chart.mr_ucl) + ")\n";
      for (const auto& g : s.chart.signals)
        out += "  point " + std::to_string(g.index + 1) + " (" + s.times[g.index] +
               (s.serials[g.index].empty() ? "" : ", serial " + terminal_text(s.serials[g.index], false)) +
               "): " + g.text + "\n";
    }
  }
  if (!r.query.board.empty()) {
    out += "\nboard " + terminal_text(r.query.board, false) + ": " + std::to_string(r.history.size()) + " tests\n";
    Table t({{"tested", Table::Align::left},
                     {"status", Table::Align::left},
                     {"lot", Table::Align::left},
                     {"station", Table::Align::left},
                     {"failing limits", Table::Align::left},
                     {"capture", Table::Align::left}});
    for (const auto& h : r.history) {
      std::string failing;
      for (const auto& v : h.verdicts)
        if (!v.passed) failing += (failing.empty() ? "" : "; ") + v.key + " = " + num(v.value);
      t.add_row({h.tested_at, h.status, terminal_text(h.lot, false), terminal_text(h.station, false),
                 failing.empty() ? "-" : terminal_text(failing, false), terminal_text(h.path, false)});
    }
    out += t.render();
  }
  return out;
}

std::string production_csv(const ProductionReport& r) {
  std::string out;
  if (!r.query.board.empty()) {
    out = "serial,tested_at,status,lot,station,fixture,operator,run_id,path,limit,value,margin,passed,verdict\n";
    for (const auto& h : r.history)
      for (const auto& v : h.verdicts)
        out += csv_cell(r.query.board) + "," + h.tested_at + "," + h.status + "," + csv_cell(h.lot) +
               "," + csv_cell(h.station) + "," + csv_cell(h.fixture) + "," +
               csv_cell(h.operator_name) + "," + std::to_string(h.run_id) + "," + csv_cell(h.path) +
               "," + csv_cell(v.key) + "," + csv_num(v.value) + "," + csv_num(v.margin) + "," +
               (v.passed ? "true" : "false") + "," + csv_cell(v.verdict) + "\n";
    return out;
  }
  out = "limit,allowed,lsl,usl,tests,failed,n,mean,sd,min,max,cp,cp_lo,cp_hi,cpk,cpk_lo,cpk_hi,confidence,status,"
        "centre,ucl,lcl,mr_bar,mr_ucl,signals\n";
  for (const auto& s : r.limits) {
    const Capability& c = s.capability;
    out += csv_cell(s.key) + "," + csv_cell(s.allowed) + "," + csv_num(s.lsl) + "," + csv_num(s.usl) +
           "," + std::to_string(s.tests) + "," + std::to_string(s.failed) + "," + std::to_string(c.n) + "," +
           csv_num(c.mean) + "," + csv_num(c.sd) + "," + csv_num(c.min) + "," + csv_num(c.max) + "," + csv_num(c.cp) +
           "," + csv_num(c.cp_lo) + "," + csv_num(c.cp_hi) + "," + csv_num(c.cpk) + "," + csv_num(c.cpk_lo) + "," +
           csv_num(c.cpk_hi) + "," + csv_num(c.confidence) + "," + std::string(code(c.status)) + "," + csv_num(s.chart.centre) + "," +
           csv_num(s.chart.ucl) + "," + csv_num(s.chart.lcl) + "," + csv_num(s.chart.mr_bar) + "," +
           csv_num(s.chart.mr_ucl) + "," + std::to_string(s.chart.signals.size()) + "\n";
  }
  return out;
}

std::string production_json(const ProductionReport& r) {
  json j;
  j["format"] = "periodfit-production";
  j["version"] = 1;
  j["database"] = r.database;
  const ProductionQuery& q = r.query;
  j["selection"] = {{"since", q.since}, {"until", q.until}, {"station", q.station}, {"lot", q.lot},
                    {"serial", q.serial}, {"limit", q.limit}, {"board", q.board}};
  j["tests"] = {{"total", r.captures}, {"pass", r.passed}, {"fail", r.failed}, {"error", r.errors},
                {"yield", json_num(r.yield)}, {"first", r.first_test}, {"last", r.last_test}};
  json limits = json::array();
  for (const auto& s : r.limits) {
    const Capability& c = s.capability;
    json l;
    l["key"] = s.key;
    l["allowed"] = s.allowed;
    l["lsl"] = json_num(s.lsl);
    l["usl"] = json_num(s.usl);
    l["tests"] = s.tests;
    l["failed"] = s.failed;
    l["capability"] = {{"status", code(c.status)}, {"n", c.n}, {"mean", json_num(c.mean)}, {"sd", json_num(c.sd)},
                       {"min", json_num(c.min)}, {"max", json_num(c.max)}, {"cp", json_num(c.cp)},
                       {"cp_lo", json_num(c.cp_lo)}, {"cp_hi", json_num(c.cp_hi)}, {"cpk", json_num(c.cpk)},
                       {"cpk_lo", json_num(c.cpk_lo)}, {"cpk_hi", json_num(c.cpk_hi)},
                       {"confidence", c.confidence}, {"method", c.method}};
    json points = json::array();
    for (std::size_t i = 0; i < s.chart.x.size(); ++i)
      points.push_back({{"tested_at", s.times[i]}, {"serial", s.serials[i]}, {"value", json_num(s.chart.x[i])},
                        {"mr", json_num(s.chart.mr[i])}});
    json signals = json::array();
    for (const auto& g : s.chart.signals) signals.push_back({{"rule", g.rule}, {"point", g.index + 1}, {"text", g.text}});
    l["chart"] = {{"status", code(s.chart.status)}, {"centre", json_num(s.chart.centre)}, {"ucl", json_num(s.chart.ucl)},
                  {"lcl", json_num(s.chart.lcl)}, {"mr_bar", json_num(s.chart.mr_bar)},
                  {"mr_ucl", json_num(s.chart.mr_ucl)}, {"sigma", json_num(s.chart.sigma)},
                  {"points", std::move(points)}, {"signals", std::move(signals)}};
    limits.push_back(std::move(l));
  }
  j["limits"] = std::move(limits);
  json history = json::array();
  for (const auto& h : r.history) {
    json verdicts = json::array();
    for (const auto& v : h.verdicts)
      verdicts.push_back({{"key", v.key}, {"value", json_num(v.value)}, {"margin", json_num(v.margin)},
                          {"passed", v.passed}, {"verdict", v.verdict}});
    history.push_back({{"tested_at", h.tested_at}, {"status", h.status}, {"lot", h.lot}, {"station", h.station},
                       {"fixture", h.fixture}, {"operator", h.operator_name}, {"run_id", h.run_id},
                       {"path", h.path}, {"verdicts", std::move(verdicts)}});
  }
  j["history"] = std::move(history);
  return output::json_text(j);
}

namespace {

report::LineSeries horizontal(const std::string& name, double x_lo, double x_hi, double y, const std::string& color,
                              bool dashed) {
  report::LineSeries l;
  l.name = name;
  l.x = {x_lo, x_hi};
  l.y = {y, y};
  l.color = color;
  l.dashed = dashed;
  return l;
}

report::Figure histogram(const LimitStats& s, const std::string& id) {
  report::ToleranceHistogram spec;
  spec.id = id;
  spec.title = s.key + ": distribution against the tolerance band";
  spec.quantity = s.key;
  spec.count_label = "tests";
  spec.lo = s.lsl;
  spec.hi = s.usl;
  spec.width_px = 720;
  spec.legend = true;
  return report::tolerance_histogram(spec, s.chart.x);
}

report::Figure control_chart(const LimitStats& s, const std::string& id) {
  const ControlChart& c = s.chart;
  report::Figure fig;
  fig.id = id;
  fig.title = s.key + ": individuals and moving-range chart";
  const double n = static_cast<double>(c.x.size());
  report::Panel xp;
  xp.x.quantity = "test";
  xp.x.integer_steps = true;
  xp.x.show_label = false;
  xp.y.quantity = s.key;
  report::LineSeries line;
  line.name = "value";
  report::PointSeries signal;
  signal.name = "run-rule signal";
  for (std::size_t i = 0; i < c.x.size(); ++i) {
    line.x.push_back(static_cast<double>(i + 1));
    line.y.push_back(c.x[i]);
  }
  for (const auto& g : c.signals) {
    signal.x.push_back(static_cast<double>(g.index + 1));
    signal.y.push_back(c.x[g.index]);
  }
  xp.lines.push_back(std::move(line));
  xp.lines.push_back(horizontal("centre", 1, n, c.centre, "#555555", false));
  xp.lines.push_back(horizontal("control limits (x̄ ± 2.66 MR̄)", 1, n, c.ucl, "#c0392b", true));
  xp.lines.push_back(horizontal("", 1, n, c.lcl, "#c0392b", true));
  if (!signal.x.empty()) xp.points.push_back(std::move(signal));
  report::Panel mp;
  mp.x.quantity = "test";
  mp.x.integer_steps = true;
  mp.y.quantity = "moving range";
  mp.height_px = 140;
  report::LineSeries mr;
  mr.name = "MR";
  for (std::size_t i = 1; i < c.mr.size(); ++i) {
    mr.x.push_back(static_cast<double>(i + 1));
    mr.y.push_back(c.mr[i]);
  }
  mp.lines.push_back(std::move(mr));
  mp.lines.push_back(horizontal("MR UCL (3.267 MR̄)", 1, n, c.mr_ucl, "#c0392b", true));
  mp.y.min = 0;
  fig.panels.push_back(std::move(xp));
  fig.panels.push_back(std::move(mp));
  return fig;
}

report::Figure trend(const LimitStats& s, const std::string& id) {
  report::Figure fig;
  fig.id = id;
  fig.title = s.key + ": trend over time";
  report::Panel p;
  p.x.quantity = "time since first test";
  p.y.quantity = s.key;
  const double t0 = epoch_s(s.times.front());
  const double span_s = epoch_s(s.times.back()) - t0;
  // Seconds, minutes, hours or days: the largest unit the span covers at least twice.
  const double scale_s = span_s > 2 * 86400 ? 86400 : span_s > 2 * 3600 ? 3600 : span_s > 120 ? 60 : 1;
  p.x.unit = scale_s == 86400 ? "d" : scale_s == 3600 ? "h" : scale_s == 60 ? "min" : "s";
  report::PointSeries pts;
  pts.name = "test";
  pts.color = "#1f5fa8";
  for (std::size_t i = 0; i < s.times.size(); ++i) {
    pts.x.push_back((epoch_s(s.times[i]) - t0) / scale_s);
    pts.y.push_back(s.chart.x[i]);
  }
  const double tn = std::max(pts.x.back(), 1e-3);
  if (std::isfinite(s.lsl)) p.lines.push_back(horizontal("LSL", 0, tn, s.lsl, "#c0392b", true));
  if (std::isfinite(s.usl)) p.lines.push_back(horizontal("USL", 0, tn, s.usl, "#c0392b", true));
  p.points.push_back(std::move(pts));
  fig.panels.push_back(std::move(p));
  return fig;
}

}  // namespace

std::string production_html(const ProductionReport& r) {
  using report::xml_escape;
  std::string h = "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
                  "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\">\n"
                  "<title>periodfit production statistics</title>\n<style>"
                  "body{font-family:sans-serif;margin:2em;color:#222}table{border-collapse:collapse;margin:1em 0}"
                  "td,th{border:1px solid #ccc;padding:3px 8px;text-align:left}th{background:#f2f2f2}"
                  ".fail{color:#b03a2e;font-weight:bold}.num{text-align:right}"
                  "</style>\n</head>\n<body>\n<h1>Production statistics</h1>\n";
  h += "<p>Database " + xml_escape(r.database) + "; selection: " + xml_escape(selection_text(r.query)) + ".</p>\n";
  h += "<p>Tests: " + std::to_string(r.captures) + " (" + std::to_string(r.passed) + " pass, " +
       std::to_string(r.failed) + " fail, " + std::to_string(r.errors) + " error)";
  if (r.captures > 0)
    h += "; yield " + format_fixed(100 * r.yield, 1) + " %; " + xml_escape(r.first_test) + " … " +
         xml_escape(r.last_test);
  h += ".</p>\n";
  if (!r.limits.empty()) {
    h += "<table>\n<tr><th>limit</th><th>allowed</th><th>n</th><th>fail</th><th>mean</th><th>s</th><th>Cp (CI)</th>"
         "<th>Cpk (CI)</th><th>chart signals</th></tr>\n";
    for (const auto& s : r.limits) {
      const Capability& c = s.capability;
      h += "<tr><td>" + xml_escape(s.key) + "</td><td>" + xml_escape(s.allowed) + "</td><td class=\"num\">" +
           std::to_string(c.n) + "</td><td class=\"num" + std::string(s.failed ? " fail" : "") + "\">" +
           std::to_string(s.failed) + "</td><td class=\"num\">" + num(c.mean) + "</td><td class=\"num\">" +
           num(c.sd, 3) + "</td><td>" +
           xml_escape(index_text(c, c.cp, c.cp_lo, c.cp_hi)) + "</td><td>" +
           xml_escape(index_text(c, c.cpk, c.cpk_lo, c.cpk_hi)) + "</td><td>" +
           std::to_string(s.chart.signals.size()) + "</td></tr>\n";
    }
    h += "</table>\n<p>Cp and Cpk per NIST/SEMATECH e-Handbook §6.1.6; Cp interval from the χ² distribution, Cpk "
         "interval per Bissell (1990). Control limits x̄ ± 2.66·MR̄, MR UCL 3.267·MR̄; run rules 1–4 of Nelson "
         "(1984).</p>\n";
  }
  std::size_t k = 0;
  for (const auto& s : r.limits) {
    ++k;
    h += "<section>\n<h2>" + xml_escape(s.key) + "</h2>\n";
    if (s.chart.x.empty()) {
      h += "<p>No evaluated values.</p>\n</section>\n";
      continue;
    }
    h += report::render_svg(histogram(s, "h" + std::to_string(k)));
    if (s.chart.status == StatisticStatus::ok) {
      h += report::render_svg(control_chart(s, "c" + std::to_string(k)));
      h += report::render_svg(trend(s, "t" + std::to_string(k)));
      if (!s.chart.signals.empty()) {
        h += "<ul>\n";
        for (const auto& g : s.chart.signals)
          h += "<li>test " + std::to_string(g.index + 1) + " (" + xml_escape(s.times[g.index]) +
               (s.serials[g.index].empty() ? "" : ", serial " + xml_escape(s.serials[g.index])) + "): " +
               xml_escape(g.text) + "</li>\n";
        h += "</ul>\n";
      }
    }
    h += "</section>\n";
  }
  if (!r.query.board.empty()) {
    h += "<section>\n<h2>Board " + xml_escape(r.query.board) + "</h2>\n<table>\n<tr><th>tested</th><th>status</th>"
         "<th>lot</th><th>station</th><th>limits</th><th>capture</th></tr>\n";
    for (const auto& t : r.history) {
      std::string limits;
      for (const auto& v : t.verdicts)
        limits += "<span" + std::string(v.passed ? "" : " class=\"fail\"") + ">" + xml_escape(v.key) + " = " +
                  num(v.value) + "</span><br>";
      h += "<tr><td>" + xml_escape(t.tested_at) + "</td><td" + (report::file_status_from(t.status) == report::FileStatus::pass ? "" : " class=\"fail\"") + ">" +
           xml_escape(t.status) + "</td><td>" + xml_escape(t.lot) + "</td><td>" + xml_escape(t.station) + "</td><td>" +
           limits + "</td><td>" + xml_escape(t.path) + "</td></tr>\n";
    }
    h += "</table>\n</section>\n";
  }
  h += "</body>\n</html>\n";
  return h;
}

}  // namespace periodfit::store

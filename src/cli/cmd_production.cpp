// periodfit production --db TARGET: the production view of a results database — yield, Cp/Cpk
// with confidence intervals, individuals control charts with run rules, trends and a board's
// history — as text, CSV, JSON or a self-contained HTML page (store/production.hpp).
#include <memory>
#include <string>

#include "cli/commands.hpp"
#include "core/error.hpp"
#include "core/exit_code.hpp"
#include "io/output_set.hpp"
#include "store/database.hpp"
#include "store/production.hpp"

namespace periodfit::cli {

namespace {
struct ProductionArgs {
  std::string database;
  store::ProductionQuery query;
  std::string format = "text";
  std::string out;
};
}  // namespace

Runner add_production(CLI::App& app) {
  auto args = std::make_shared<ProductionArgs>();
  ProductionArgs& a = *args;
  app.add_option("--db", a.database, "the results database: a SQLite file or a postgresql:// URL")
      ->required()
      ->type_name("TARGET");
  app.add_option("--since", a.query.since, "tests at or after this UTC date/time (2026-12-01 or 2026-12-01T08:00)")
      ->type_name("TIME");
  app.add_option("--until", a.query.until, "tests before this UTC date/time")->type_name("TIME");
  app.add_option("--station", a.query.station, "only this station")->type_name("NAME");
  app.add_option("--lot", a.query.lot, "only this lot")->type_name("LOT");
  app.add_option("--serial", a.query.serial, "only serials matching this glob (* and ?)")->type_name("GLOB");
  app.add_option("--limit", a.query.limit, "only this limit key, e.g. 'damping[pole=1]'")->type_name("KEY");
  app.add_option("--board", a.query.board, "list this serial's test history")->type_name("SERIAL");
  app.add_option("--confidence", a.query.capability.confidence, "confidence level of the Cp/Cpk intervals")
      ->capture_default_str()
      ->type_name("P");
  app.add_option("--format", a.format, "text, csv, json or html")->capture_default_str()->type_name("FORMAT");
  app.add_option("--out", a.out, "write to this file instead of standard output")->type_name("PATH");
  return [args]() -> int {
    ProductionArgs& b = *args;
    if (b.format != "text" && b.format != "csv" && b.format != "json" && b.format != "html")
      throw OptionError("--format", b.format, "must be text, csv, json or html");
    b.query.validate();
    io::OutputSet outputs({{"--out", b.out}}, {});
    auto db = store::open_database(b.database);
    const store::ProductionReport r = store::production_report(*db, b.query);
    const std::string body = b.format == "csv"    ? store::production_csv(r)
                             : b.format == "json" ? store::production_json(r)
                             : b.format == "html" ? store::production_html(r)
                                                  : store::production_text(r);
    if (outputs.requested("--out")) outputs.set("--out", body);
    outputs.publish(outputs.requested("--out") ? "" : body);
    return to_int(ExitCode::ok);
  };
}

}  // namespace periodfit::cli

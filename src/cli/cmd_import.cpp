// periodfit import REPORT_DIR… --db TARGET: records finished batch report folders (their
// summary.json and per-file JSON) in a results database — after the database was down during a
// run, or to backfill history (store/import.hpp, docs/results-db.md).
#include <memory>
#include <string>
#include <vector>

#include "cli/commands.hpp"
#include "core/exit_code.hpp"
#include "io/output_file.hpp"
#include "store/database.hpp"
#include "store/import.hpp"

namespace periodfit::cli {

namespace {
struct ImportArgs {
  std::vector<std::string> folders;
  std::string database;
};
}  // namespace

Runner add_import(CLI::App& app) {
  auto args = std::make_shared<ImportArgs>();
  app.add_option("REPORT_DIR", args->folders, "batch report folders (with summary.json and files/)")
      ->required()
      ->type_name("REPORT_DIR");
  app.add_option("--db", args->database, "the results database: a SQLite file or a postgresql:// URL")
      ->required()
      ->type_name("TARGET");
  return [args]() -> int {
    std::string out;
    for (const auto& folder : args->folders) {
      const store::ImportResult r = store::import_report_folder(folder, args->database);
      out += folder + ": " + std::to_string(r.files) + " captures, " + std::to_string(r.added) + " new, " +
             std::to_string(r.known) + " already recorded" +
             (r.config_found ? "" : " (config not found: recorded under the hash of an empty config)") + "\n";
    }
    io::write_stdout(out);
    return to_int(ExitCode::ok);
  };
}

}  // namespace periodfit::cli

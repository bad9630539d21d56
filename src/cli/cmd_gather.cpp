// periodfit gather SHARD_DIR… --report OUTDIR: the report folders of one batch run split into
// shards (batch --shard K/N) combined into the report folder a single run would have written
// (batch/shard.hpp, docs/scale-out.md). Exit codes as batch's; an incomplete run is exit 2,
// with one line per missing, unfinished or conflicting shard and the captures it holds.
#include <memory>
#include <string>
#include <vector>

#include "batch/shard.hpp"
#include "cli/commands.hpp"
#include "core/error.hpp"
#include "core/exit_code.hpp"
#include "io/output_file.hpp"
#include "core/safe_text.hpp"

namespace periodfit::cli {

namespace {

struct GatherArgs {
  batch::GatherOptions run;
  bool quiet = false;
};

void gather_warning(const std::string& line) {
  const std::string text = "periodfit: warning: " + terminal_text(line, false) + "\n";
  std::fputs(text.c_str(), stderr);
}

}  // namespace

Runner add_gather(CLI::App& app) {
  auto args = std::make_shared<GatherArgs>();
  GatherArgs& a = *args;
  app.add_option("SHARD_DIR", a.run.shards, "the report folders of the shards (batch --shard K/N --report SHARD_DIR)")
      ->required()
      ->type_name("SHARD_DIR");
  app.add_option("--report", a.run.report_dir,
                 "folder for the combined summary.csv, summary.json, files/*.json, report.html")
      ->required()
      ->type_name("OUTDIR");
  app.add_flag("--quiet,-q", a.quiet, "only the closing line");
  return [args]() -> int {
    GatherArgs& g = *args;
    g.run.rebuild_config = rebuild_batch_config;
    const batch::GatherResult r = batch::gather_shards(g.run);
    for (const auto& w : r.warnings) gather_warning(w);
    if (!r.complete) {
      for (const auto& p : r.problems) gather_warning(p);
      const std::size_t n = r.problems.size();
      throw InputError("", 0, 0,
                       "the run is incomplete (" + std::to_string(n) + (n == 1 ? " problem" : " problems") +
                           " above); nothing was written; run the shards named and gather again");
    }
    std::string out;
    if (!g.quiet)
      out += "gathered " + std::to_string(r.partition.count) + " shards of run " + r.run_id + ": " +
             std::to_string(r.batch.files.size()) + " captures\nreport: " + r.batch.report_html + "\n";
    out += batch::batch_totals_line(r.batch) + "\n";
    io::write_stdout(out);
    return to_int(batch::batch_exit_code(r.batch));
  };
}

}  // namespace periodfit::cli

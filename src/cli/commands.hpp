#pragma once
/// The command table's entries. Each cmd_<name>.cpp defines one `add_<name>` that declares the
/// subcommand's options on `app` (bound to a library Options struct, defaults shown in --help)
/// and returns the function that runs it and gives the exit code. Commands include no FFTW or
/// Eigen headers: they parse, call one library function, and print.
#include <CLI/CLI.hpp>
#include <functional>

#include "batch/runner.hpp"

namespace periodfit::cli {

using Runner = std::function<int()>;

Runner add_info(CLI::App& app);
Runner add_analyze(CLI::App& app);
Runner add_frf(CLI::App& app);
Runner add_steady_state(CLI::App& app);
Runner add_excite(CLI::App& app);
Runner add_batch(CLI::App& app);
Runner add_gather(CLI::App& app);

/// The BatchConfig a batch run had, from the settings a shard recorded (cmd_batch.cpp parses the
/// recorded words with the batch's own setting options); used by gather.
batch::BatchConfig rebuild_batch_config(const batch::SettingsRecord& record);
Runner add_import(CLI::App& app);
Runner add_production(CLI::App& app);

}  // namespace periodfit::cli

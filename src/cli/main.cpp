// periodfit: the command-line driver. Parses the command line, dispatches to one command, and
// turns every library error into one `periodfit: error: …` line and exit code 2.
#include <signal.h>

#include <cerrno>
#include <csignal>
#include <cstdio>
#include <exception>
#include <map>
#include <string>
#include <vector>

#include "cli/commands.hpp"
#include "cli/usage.hpp"
#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "core/exit_code.hpp"
#include "io/interrupt_cleanup.hpp"
#include "io/mapped_file.hpp"
#include "io/output_file.hpp"
#include "core/safe_text.hpp"

namespace {

struct Command {
  const char* name;
  const char* summary;
  periodfit::cli::Runner (*add)(CLI::App&);
};

// The one command table: name, one-line description, and the function that declares it.
constexpr Command kCommands[] = {
    {"info", "check captures: length in periods, clock, code step, flat samples, dc, rms",
     periodfit::cli::add_info},
    {"analyze", "lock onto the fundamental; harmonics with uncertainties, THD, SINAD, ENOB",
     periodfit::cli::add_analyze},
    {"frf", "DUT frequency response with error bars and a fitted pole/zero model",
     periodfit::cli::add_frf},
    {"steady-state", "the DUT's periodic output for another input, by Fourier-series superposition",
     periodfit::cli::add_steady_state},
    {"excite", "write excitation signals (multisines, standard waveforms) as WAV or CSV",
     periodfit::cli::add_excite},
    {"batch", "run a characterisation over folders of captures; limits, summary, HTML report",
     periodfit::cli::add_batch},
    {"gather", "combine the report folders of a batch run in shards (batch --shard K/N) into one",
     periodfit::cli::add_gather},
    {"import", "record finished batch report folders in a results database",
     periodfit::cli::add_import},
    {"production", "yield, Cp/Cpk with intervals, control charts, board history (results database)",
     periodfit::cli::add_production},
};

constexpr const char* kExitCodes =
    "Exit codes: 0 success (batch: all passed), 1 batch: a limit or a flag failed, "
    "2 error: bad usage, unreadable or invalid input.";

void print_error(const std::string& message) {
  // The message may quote input text (names, cells, paths): one line, controls shown as \xHH.
  std::fprintf(stderr, "periodfit: error: %s\n", periodfit::terminal_text(message, false).c_str());
}

/// The one place standard output is flushed and closed, whatever the command printed (help,
/// the batch table, results): a write the C library buffered can fail only here (disk full
/// behind a redirection, /dev/full), and a result that did not arrive must not exit 0
/// (docs/robustness.md, issue 11 class 3). When the command already failed, its error line
/// stands and no second line is added.
int close_stdout(int exit_code) {
  errno = 0;
  const bool flushed = std::fflush(stdout) == 0;
  int reason = errno;
  const bool clean = !std::ferror(stdout);
  errno = 0;
  const bool closed = std::fclose(stdout) == 0;
  if (reason == 0) reason = errno;
  if (flushed && clean && closed) return exit_code;
  if (exit_code != periodfit::to_int(periodfit::ExitCode::error))
    print_error(periodfit::IoError("standard output", "cannot write", reason != 0 ? reason : EIO).what());
  return periodfit::to_int(periodfit::ExitCode::error);
}

// The one interrupt handler (DEVELOPERS.md, "Process-wide state"): removes what the library
// registered with io::InterruptCleanup (AtomicFile temporaries, report staging folders), then
// lets the signal end the process as it would have, so the exit status still says which signal.
extern "C" void remove_partial_outputs_and_reraise(int signal_number) {
  periodfit::io::remove_interrupted_paths();
  std::signal(signal_number, SIG_DFL);
  std::raise(signal_number);  // blocked until this handler returns, then ends the process
}

// A signal the process was started with ignored (nohup's SIGHUP) stays ignored.
void install_interrupt_handler() {
  for (int s : periodfit::io::kInterruptSignals) {
    struct sigaction current {};
    ::sigaction(s, nullptr, &current);
    if (!(current.sa_flags & SA_SIGINFO) && current.sa_handler == SIG_IGN) continue;
    struct sigaction action {};
    action.sa_handler = remove_partial_outputs_and_reraise;
    sigemptyset(&action.sa_mask);
    for (int blocked : periodfit::io::kInterruptSignals) sigaddset(&action.sa_mask, blocked);
    action.sa_flags = static_cast<int>(SA_RESETHAND);
    ::sigaction(s, &action, nullptr);
  }
}

}  // namespace

static int run_main(int argc, char** argv) {
  using periodfit::ExitCode;
  using periodfit::to_int;
  // The process-wide signal handlers, installed here and nowhere in the library.
  install_interrupt_handler();
  periodfit::io::install_mapped_file_guard();
  CLI::App app{"periodfit: measurement post-processor for sampled periodic waveforms", "periodfit"};
  app.footer(kExitCodes);
  app.require_subcommand(1);
  // Set before the commands are added: each command copies its parent's formatter and help flag.
  app.formatter(periodfit::cli::make_help_formatter());
  app.set_help_flag("-h,--help", "show this text and exit");
  app.set_version_flag("--version", std::string("periodfit ") + PERIODFIT_VERSION, "print the version and exit");
  std::map<const CLI::App*, periodfit::cli::Runner> runners;
  for (const auto& command : kCommands) {
    CLI::App* sub = app.add_subcommand(command.name, command.summary);
    sub->footer(kExitCodes);
    runners[sub] = command.add(*sub);
  }
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForAllHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForVersion& e) {
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    // Usage errors in the project's words: one line naming the option and what it expects.
    const std::vector<std::string> args(argv + (argc > 0 ? 1 : 0), argv + argc);
    print_error(periodfit::cli::usage_error_message(e, app, args));
    return to_int(ExitCode::error);
  } catch (const periodfit::Error& e) {
    // An option value the library's readers refused (a quantity like --rate 1MQ): its own
    // message says what was expected.
    print_error(e.what());
    return to_int(ExitCode::error);
  }
  std::string command = "periodfit";
  try {
    for (const auto& [sub, run] : runners)
      if (sub->parsed()) {
        command = sub->get_name();
        return run();
      }
    std::string names;
    for (const auto& c : kCommands) names += (names.empty() ? "" : ", ") + std::string(c.name);
    print_error("no command given; commands: " + names);
    return to_int(ExitCode::error);
  } catch (const periodfit::Error& e) {
    print_error(e.what());
  } catch (const std::bad_alloc&) {
    // Library steps that can run out name themselves (with_memory_step); this is the fallback.
    print_error(periodfit::OutOfMemoryError("running " + command).what());
  } catch (const std::exception& e) {
    print_error(std::string("internal error: ") + e.what());
  }
  return to_int(ExitCode::error);
}

int main(int argc, char** argv) { return close_stdout(run_main(argc, argv)); }

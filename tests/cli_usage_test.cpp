// The command line's own voice (cli/usage.hpp): whole --help texts and one line per usage-error
// kind, exit 2, nothing on stdout.
#include <doctest/doctest.h>

#include <string>

#include "support/cli_runner.hpp"

using periodfit::test::run_cli;

TEST_CASE("cli usage: periodfit --help prints the usage line, the commands and the exit codes") {
  const auto r = run_cli("--help");
  CHECK(r.exit_code == 0);
  CHECK(r.err == "");
  CHECK(r.out ==
      "usage: periodfit COMMAND [options]\n"
      "\n"
      "periodfit: measurement post-processor for sampled periodic waveforms\n"
      "\n"
      "commands:\n"
      "  info          check captures: length in periods, clock, code step, flat samples, dc, rms\n"
      "  analyze       lock onto the fundamental; harmonics with uncertainties, THD, SINAD, ENOB\n"
      "  frf           DUT frequency response with error bars and a fitted pole/zero model\n"
      "  steady-state  the DUT's periodic output for another input, by Fourier-series superposition\n"
      "  excite        write excitation signals (multisines, standard waveforms) as WAV or CSV\n"
      "  batch         run a characterisation over folders of captures; limits, summary, HTML report\n"
      "  gather        combine the report folders of a batch run in shards (batch --shard K/N) into one\n"
      "  import        record finished batch report folders in a results database\n"
      "  production    yield, Cp/Cpk with intervals, control charts, board history (results database)\n"
      "\n"
      "`periodfit COMMAND --help` lists a command's options.\n"
      "\n"
      "options:\n"
      "  --help, -h                show this text and exit\n"
      "  --version                 print the version and exit\n"
      "\n"
      "Exit codes: 0 success (batch: all passed), 1 batch: a limit or a flag failed, 2 error: bad usage,\n"
      "unreadable or invalid input.\n");
}

TEST_CASE("cli usage: a command's --help groups its options with defaults and relations in words") {
  const auto r = run_cli("steady-state --help");
  CHECK(r.exit_code == 0);
  CHECK(r.err == "");
  CHECK(r.out ==
      "usage: periodfit steady-state [options]\n"
        "\n"
        "the DUT's periodic output for another input, by Fourier-series superposition\n"
        "\n"
        "system:\n"
        "  --model FILE              model file written by frf (may hold measured FRF points)\n"
        "                            cannot be combined with --system\n"
        "  --system EXPR             H(s) as a rational expression in s (rad/s), e.g. \"1/(1 + 1e-3*s)\" or\n"
        "                            \"w^2/(s^2 + 2*0.35*w*s + w^2); w = 2*pi*1200\"\n"
        "                            (docs/system-expression.md)\n"
        "                            cannot be combined with --model\n"
        "  --delay S                 dead time T of H(s)·e^{-sT} for --system, seconds\n"
        "                            default 0; only together with --system\n"
        "  --response-from model|measured\n"
        "                            with a model file holding measured points: 'model' (the fit everywhere)\n"
        "                            or 'measured' (measured points where they exist, the model elsewhere)\n"
        "                            default model; only together with --model\n"
        "\n"
        "input:\n"
        "  --wave KIND               input waveform: sine, square, triangle, sawtooth, half-wave, full-wave,\n"
        "                            pulse (docs/waveforms.md)\n"
        "                            cannot be combined with --harmonic or --input-file\n"
        "  --amplitude A             peak A of the waveform (pulse: its height)\n"
        "                            default 1\n"
        "  --f0 HZ                   fundamental in Hz, e.g. 1k (full-wave: the sine before rectification)\n"
        "                            default 1000\n"
        "  --duty D                  square and pulse: fraction of the period high, in (0, 1)\n"
        "                            default 0.5\n"
        "  --offset V                dc added to the input\n"
        "                            default 0\n"
        "  --harmonic N:A:DEG        an input term n:amplitude:phase_deg (cos convention, at --f0);\n"
        "                            repeatable\n"
        "                            cannot be combined with --input-file or --wave\n"
        "  --input-file FILE         use a capture's analysed harmonics as the input\n"
        "                            cannot be combined with --harmonic or --wave; only together with\n"
        "                            --channel\n"
        "  --channel CH              channel of --input-file: a name, or #N for the data channel at 0-based\n"
        "                            position N\n"
        "                            only together with --input-file\n"
        "\n"
        "output:\n"
        "  --harmonics N             input harmonics used; 0 = automatic (input energy left out below the\n"
        "                            bound); a capture: harmonics analysed\n"
        "                            default 0\n"
        "  --energy-bound F          automatic count: largest fraction of the input's ac energy left out\n"
        "                            default 1e-06\n"
        "  --csv OUT                 write samples time_s,value[,value_u] to OUT ('-' = stdout)\n"
        "  --periods P               periods of samples in --csv\n"
        "                            default 1\n"
        "  --rate HZ                 sample rate of --csv in Hz, e.g. 48k; 0 = 1000 samples per period\n"
        "                            default 0\n"
        "  --json PATH               write the prediction as JSON to PATH ('-' = stdout, instead of the text)\n"
        "  --list N                  harmonics listed in the text table; 0 = all (JSON and CSV always hold\n"
        "                            every one)\n"
        "                            default 50\n"
        "\n"
        "other options:\n"
        "  --help, -h                show this text and exit\n"
        "\n"
        "Exit codes: 0 success (batch: all passed), 1 batch: a limit or a flag failed, 2 error: bad usage,\n"
        "unreadable or invalid input.\n");
  // No wording of the argument parser's own layout.
  for (const char* stock : {"Excludes:", "Needs:", "Usage:", "OPTIONS", "SUBCOMMAND", "Print this help"})
    CHECK(r.out.find(stock) == std::string::npos);
}

TEST_CASE("cli usage: each kind of usage error is one line naming the option and what it expects") {
  struct Case {
    const char* args;
    const char* err;
  };
  const Case cases[] = {
      // no command / a misspelt one
      {"", "periodfit: error: no command given; commands: info, analyze, frf, steady-state, excite, batch, gather, import, production\n"},
      {"stedy-state --wave sine",
       "periodfit: error: unknown command \"stedy-state\"; did you mean steady-state? (commands: info, analyze, frf, "
       "steady-state, excite, batch, gather, import, production)\n"},
      {"--verison", "periodfit: error: unknown option --verison; did you mean --version?\n"},
      // unknown option: did-you-mean by edit distance over the command's own options
      {"steady-state --system '1/(1 + s)' --wave sine --rat 1000", "periodfit: error: unknown option --rat; did you mean --rate?\n"},
      {"steady-state --system '1/(1 + s)' --wave sine --respons-from measured",
       "periodfit: error: unknown option --respons-from; did you mean --response-from?\n"},
      {"analyze x.csv --zzzzzz", "periodfit: error: unknown option --zzzzzz (periodfit analyze --help lists the options)\n"},
      // the removed coefficient lists point to their replacement
      {"steady-state --num 1 --den 1,1 --wave sine",
       "periodfit: error: unknown option --num; did you mean --system? (H(s) as an expression in s, e.g. --system "
       "\"1/(1 + 1e-3*s)\")\n"},
      // a required argument or option
      {"analyze", "periodfit: error: periodfit analyze needs FILE: capture to analyse (CSV or audio)\n"},
      // option relations
      {"steady-state --system '1/(1 + s)' --model m.json --wave sine",
       "periodfit: error: --model cannot be combined with --system\n"},
      {"steady-state --delay 1e-3 --wave sine", "periodfit: error: --delay only applies together with --system\n"},
      // values that do not convert
      {"steady-state --system '1/(1 + s)' --wave sine --rate 1MQ", "periodfit: error: --rate: \"1MQ\" is not a frequency (e.g. 48k, 1MHz)\n"},
      {"steady-state --system '1/(1 + s)' --wave sine --list 2.5", "periodfit: error: --list: \"2.5\" is not a whole number\n"},
      // a value outside a fixed set
      {"steady-state --model m.json --response-from meassured --wave sine",
       "periodfit: error: --response-from: \"meassured\" is not one of model, measured; did you mean measured?\n"},
      // a value missing at the end
      {"steady-state --system '1/(1 + s)' --wave sine --rate", "periodfit: error: --rate needs a value (HZ)\n"},
      // one argument too many
      {"analyze a.csv b.csv", "periodfit: error: unexpected argument \"b.csv\" (periodfit analyze takes no more arguments)\n"},
  };
  for (const auto& c : cases) {
    INFO(c.args);
    const auto r = run_cli(c.args);
    CHECK(r.exit_code == 2);
    CHECK(r.out == "");
    CHECK(r.err == c.err);
  }
}

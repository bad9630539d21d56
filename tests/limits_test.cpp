// Batch limits: parsing from TOML, load-time errors with their whole messages, and evaluation
// including guard bands. The expected verdicts follow from the definitions in
// docs/batch-config.md (guarded acceptance as in ISO 14253-1: pass only when the whole 95 %
// interval lies inside the tolerance).
#include <doctest/doctest.h>

#include <cmath>
#include <string>

#include "batch/config.hpp"
#include "batch/limits.hpp"
#include "core/error.hpp"

using namespace periodfit;
using namespace periodfit::batch;

namespace {

std::string load_error(const std::string& text) {
  try {
    parse_batch_config(text, "limits.toml");
  } catch (const InputError& e) {
    return e.what();
  }
  return "(no error)";
}

Limit finished(Limit l, AnalysisMode mode = AnalysisMode::identify) {
  const auto problem = finish_limit(l, mode);
  REQUIRE_MESSAGE(!problem, (problem ? problem->message : std::string()));
  return l;
}

}  // namespace

TEST_CASE("limits: a config with every limit form parses into ranges") {
  const auto c = parse_batch_config(R"(
[analysis]
mode = "frf"
input = "v_in"
output = "v_out"
order = "0/2"

[[limit]]
result = "dc_gain"
nominal = 1.0
tolerance = 0.02
guard_band = true

[[limit]]
result = "natural_frequency_hz"
pole = 1
nominal = 1200
tolerance_pct = 5

[[limit]]
result = "mag_db"
harmonic = 3
min = -1
max = 1

[[limit]]
result = "mag_db"
freq_hz = 5000
max = -20
label = "stop band"

[[limit]]
result = "model_adequate"
expect = true
)",
                                    "limits.toml");
  CHECK(c.mode == AnalysisMode::identify);
  CHECK(c.identify.input_channel == "v_in");
  CHECK(c.identify.order == "0/2");
  REQUIRE(c.limits.size() == 5);
  CHECK(c.limits[0].lo == doctest::Approx(0.98));
  CHECK(c.limits[0].hi == doctest::Approx(1.02));
  CHECK(c.limits[0].guard_band);
  CHECK(c.limits[0].line == 8);  // the [[limit]] header
  CHECK(c.limits[1].lo == doctest::Approx(1140));  // 1200 − 5 % of 1200
  CHECK(c.limits[1].hi == doctest::Approx(1260));
  CHECK(c.limits[1].key() == "natural_frequency_hz[pole=1]");
  CHECK(c.limits[2].key() == "mag_db[n=3]");
  CHECK(c.limits[3].key() == "mag_db[f=5000]");
  CHECK(std::isinf(c.limits[3].lo));
  CHECK(c.limits[3].hi == -20);
  CHECK(c.limits[3].describe() == "stop band (mag_db at 5000 Hz)");
  CHECK(c.limits[3].allowed_text() == "\xE2\x89\xA4 \xE2\x88\x92" "20 dB");
  CHECK(c.limits[0].allowed_text() == "1 \xC2\xB1 0.02 (guard band: 95 % interval inside)");
  CHECK(c.limits[4].lo == 1);
}

TEST_CASE("limits: unknown result name is a load-time error with a suggestion and position") {
  CHECK(load_error("[analysis]\nmode = \"analyze\"\n\n[[limit]]\nresult = \"thdd\"\nmax = 0.01\n") ==
        "limits.toml:5:10: unknown result \"thdd\" (did you mean \"thd\"? results: f0_hz, dc, "
        "rms, thd, thd_n, sinad_db, snr_db, enob_bits, crest_factor, amplitude, mag, mag_db, "
        "phase_deg, dc_gain, delay_s, time_constant_s, natural_frequency_hz, damping, q_factor, "
        "model_cost_ratio, model_adequate, linear)");
}

TEST_CASE("limits: malformed limits are load-time errors naming the field") {
  const std::string head = "[analysis]\nmode = \"frf\"\n[[limit]]\n";
  CHECK(load_error(head + "result = \"dc_gain\"\nnominal = 1\n") ==
        "limits.toml:5:11: nominal needs tolerance or tolerance_pct");
  CHECK(load_error(head + "result = \"dc_gain\"\ntolerance = 0.1\n") ==
        "limits.toml:5:13: a tolerance needs a nominal value");
  CHECK(load_error(head + "result = \"dc_gain\"\nnominal = 1\ntolerance = -0.1\n") ==
        "limits.toml:6:13: tolerance = \xE2\x88\x92" "0.1 (must be >= 0)");
  CHECK(load_error(head + "result = \"dc_gain\"\nmin = 2\nmax = 1\n") ==
        "limits.toml:6:7: min = 2 is above max = 1");
  CHECK(load_error(head + "result = \"dc_gain\"\nnominal = 1\ntolerance = 0.1\nmax = 3\n") ==
        "limits.toml:7:7: give either nominal with tolerance (or tolerance_pct) or min/max, not both");
  CHECK(load_error(head + "result = \"dc_gain\"\n") ==
        "limits.toml:3:1: no range: give nominal with tolerance (or tolerance_pct), or min and/or max");
  CHECK(load_error(head + "result = \"mag_db\"\nmax = 0\n") ==
        "limits.toml:3:1: mag_db needs harmonic = N or freq_hz = F");
  CHECK(load_error(head + "result = \"mag_db\"\nharmonic = 3\nfreq_hz = 10\nmax = 0\n") ==
        "limits.toml:6:11: mag_db takes harmonic or freq_hz, not both");
  CHECK(load_error(head + "result = \"damping\"\nmin = 0.4\n") ==
        "limits.toml:3:1: damping needs pole = K (1 = the pole entry with the smallest |p|)");
  CHECK(load_error(head + "result = \"damping\"\npole = 0\nmin = 0.4\n") ==
        "limits.toml:5:8: pole = 0 (must be >= 1)");
  CHECK(load_error(head + "result = \"thd\"\nmax = 0.01\n") ==
        "limits.toml:4:10: result \"thd\" is not available in frf mode (it is an analyze result)");
  CHECK(load_error(head + "result = \"model_adequate\"\nmin = 1\n") ==
        "limits.toml:5:7: model_adequate is a yes/no result: use expect, not min");
  CHECK(load_error(head + "result = \"dc_gain\"\nexpect = true\n") ==
        "limits.toml:5:10: expect applies to yes/no results (model_adequate, linear); dc_gain "
        "takes nominal \xC2\xB1 tolerance or min/max");
  CHECK(load_error(head + "result = \"dc_gain\"\nnominal = \"one\"\ntolerance = 1\n") ==
        "limits.toml:5:11: nominal = \"one\": expected a number with its unit, e.g. \"8 %\", "
        "\"-40 dB\", \"1.2 kHz\"");
  CHECK(load_error(head + "result = \"dc_gain\"\nnominal = true\ntolerance = 1\n") ==
        "limits.toml:5:11: nominal: expected a number or a string with a unit (\"8 %\"), found a boolean");
  CHECK(load_error(head + "result = \"dc_gain\"\nnominal = 1\ntolerence = 0.1\n") ==
        "limits.toml:6:1: unknown key \"tolerence\" in [[limit]] (did you mean \"tolerance\"?)");
  CHECK(load_error(head + "nominal = 1\n") ==
        "limits.toml:3:1: [[limit]] needs result = \"NAME\" (see docs/batch-config.md)");
  CHECK(load_error("[analysis]\nmode = \"analyze\"\n[[limit]]\nresult = \"amplitude\"\nfreq_hz = 50\nmax = 1\n") ==
        "limits.toml:5:11: amplitude takes a harmonic in analyze mode; freq_hz needs the fitted "
        "model of frf mode");
}

TEST_CASE("limits: other config errors carry positions") {
  CHECK(load_error("[analysis]\nmode = \"identfy\"\n") ==
        "limits.toml:2:8: invalid option: mode = \"identfy\" (must be analyze or frf)");
  CHECK(load_error("[anlysis]\nmode = \"frf\"\n") ==
        "limits.toml:1:2: unknown key \"anlysis\" in the config (did you mean \"analysis\"?)");
  CHECK(load_error("[analysis]\nmode = \"frf\"\norder = \"2-1\"\n").rfind("limits.toml:3:9: ", 0) == 0);
  CHECK(load_error("[analysis]\nmode = \"analyze\"\norder = \"0/2\"\n") ==
        "limits.toml:3:9: order applies in frf mode only (mode is analyze)");
  CHECK(load_error("[report]\nplots = \"some\"\n") ==
        "limits.toml:2:9: invalid option: plots = \"some\" (must be all, failed or none)");
  // toml++ reports syntax errors with their position; we prefix "TOML: ".
  CHECK(load_error("[analysis\nmode = 1\n").rfind("limits.toml:1:", 0) == 0);
  CHECK(load_error("[analysis\nmode = 1\n").find(": TOML: ") != std::string::npos);
}

TEST_CASE("limits: evaluation by value, and by the whole 95 % interval with a guard band") {
  Limit l;
  l.result = "dc_gain";
  l.nominal = 1.0;
  l.tolerance = 0.02;
  const Limit plain = finished(l);
  l.guard_band = true;
  const Limit guarded = finished(l);

  MeasurementSet m;
  // Inside, with an interval well inside: both pass.
  m.set("dc_gain", Quantity::symmetric(1.005, 0.004));
  CHECK(evaluate_limit(plain, m).passed);
  CHECK(evaluate_limit(guarded, m).passed);
  // Value inside, interval crossing the upper edge (1.015 + 0.01 > 1.02): only the plain passes.
  m.set("dc_gain", Quantity::symmetric(1.015, 0.01));
  CHECK(evaluate_limit(plain, m).passed);
  const auto g = evaluate_limit(guarded, m);
  CHECK_FALSE(g.passed);
  CHECK(g.evaluated);
  CHECK(g.verdict == "fail: inside the range, but its 95 % interval reaches outside (guard band)");
  CHECK(g.measured_text == "1.015 (95 %: 1.005 \xE2\x80\xA6 1.025)");
  // Exactly on the edge passes (bounds are inclusive).
  m.set("dc_gain", Quantity::exact(1.02));
  CHECK(evaluate_limit(plain, m).passed);
  CHECK(evaluate_limit(guarded, m).passed);
  // Outside fails either way.
  m.set("dc_gain", Quantity::symmetric(0.97, 0.001));
  CHECK(evaluate_limit(plain, m).verdict == "fail: outside the range");
  CHECK_FALSE(evaluate_limit(guarded, m).passed);
  // Unknown uncertainty cannot satisfy a guard band.
  m.set("dc_gain", Quantity{1.0});
  CHECK(evaluate_limit(plain, m).passed);
  CHECK(evaluate_limit(guarded, m).verdict ==
        "fail: no uncertainty known, so the guard band cannot be checked");
}

TEST_CASE("limits: a result that was not measured fails the limit") {
  Limit l;
  l.result = "damping";
  l.pole = 2;
  l.min = 0.3;
  const Limit d = finished(l);
  MeasurementSet m;
  m.set("damping[pole=1]", Quantity::exact(0.4));
  const auto out = evaluate_limit(d, m);
  CHECK_FALSE(out.evaluated);
  CHECK_FALSE(out.passed);
  CHECK(out.measured_text == "not available");
  CHECK(out.verdict == "fail: not measured in this file");
}

TEST_CASE("limits: phases compare modulo 360 degrees") {
  Limit l;
  l.result = "phase_deg";
  l.harmonic = 1;
  l.nominal = 180;
  l.tolerance = 5;
  l.guard_band = true;
  const Limit p = finished(l);
  MeasurementSet m;
  // −178° is 182°, inside 180 ± 5 (common practice: angles are equal modulo one turn).
  m.set("phase_deg[n=1]", Quantity::symmetric(-178, 1));
  const auto out = evaluate_limit(p, m);
  CHECK(out.passed);
  CHECK(out.measured.value == doctest::Approx(182));
  m.set("phase_deg[n=1]", Quantity::symmetric(-170, 1));
  CHECK_FALSE(evaluate_limit(p, m).passed);
}

TEST_CASE("limits: yes/no results") {
  Limit l;
  l.result = "model_adequate";
  l.expect = true;
  const Limit a = finished(l);
  MeasurementSet m;
  m.set("model_adequate", Quantity::exact(1));
  CHECK(evaluate_limit(a, m).passed);
  CHECK(evaluate_limit(a, m).measured_text == "yes");
  m.set("model_adequate", Quantity::exact(0));
  CHECK_FALSE(evaluate_limit(a, m).passed);
  CHECK(a.allowed_text() == "yes");
}

TEST_CASE("limits: analyze-mode keys carry the channel when the limit names one") {
  Limit l;
  l.result = "thd";
  l.channel = "v_out";
  l.max = 0.01;
  const Limit t = finished(l, AnalysisMode::analyze);
  CHECK(t.key() == "thd[channel=v_out]");
  CHECK(measurement_key("amplitude", "ch1", 3) == "amplitude[channel=ch1,n=3]");
  CHECK(t.describe() == "thd of v_out");
  Limit id;
  id.result = "dc_gain";
  id.channel = "v_out";
  id.max = 1;
  const auto problem = finish_limit(id, AnalysisMode::identify);
  REQUIRE(problem);
  CHECK(problem->field == "channel");
}

TEST_CASE("limits: every catalogue entry is reachable in some mode and has a description") {
  for (const auto& r : result_catalogue()) {
    CHECK_MESSAGE((r.in_analyze || r.in_identify), r.name);
    CHECK_MESSAGE(!r.description.empty(), r.name);
    CHECK(find_result(r.name) == &r);
  }
}

namespace {
// Doubles from unit conversion: one rounding of a product or a power of ten.
constexpr double kConversionTolerance = 1e-12;

Limit loaded(const std::string& body, const std::string& mode = "analyze") {
  const auto c = parse_batch_config("[analysis]\nmode = \"" + mode + "\"\n" +
                                        (mode == "frf" ? "order = \"0/2\"\n" : "") + "[[limit]]\n" + body,
                                    "limits.toml");
  REQUIRE(c.limits.size() == 1);
  return c.limits[0];
}
}  // namespace

TEST_CASE("limits: bounds written with their unit convert to SI and are shown as written") {
  // % of a ratio: 8 % = 0.08.
  Limit l = loaded("result = \"thd\"\nmax = \"8 %\"\n");
  CHECK(l.hi == doctest::Approx(0.08).epsilon(kConversionTolerance));
  CHECK(std::isinf(l.lo));
  CHECK(l.allowed_text() == "\xE2\x89\xA4 8 %");
  // dB of an amplitude ratio: 20·log10, so −40 dB = 0.01 (IEC 60027-3 field quantity).
  l = loaded("result = \"thd\"\nmax = \"-40 dB\"\n");
  CHECK(l.hi == doctest::Approx(0.01).epsilon(kConversionTolerance));
  CHECK(l.allowed_text() == "\xE2\x89\xA4 \xE2\x88\x92" "40 dB");
  // A dB result takes dB as it is.
  l = loaded("result = \"mag_db\"\nharmonic = 1\nmin = \"-40 dB\"\n", "frf");
  CHECK(l.lo == -40);
  // SI prefixes: 1.2 kHz = 1200 Hz, 250 us = 2.5e-4 s, 20 mV = 0.02 V.
  l = loaded("result = \"f0_hz\"\nnominal = \"1.2 kHz\"\ntolerance = \"5 Hz\"\n");
  CHECK(l.lo == doctest::Approx(1195).epsilon(kConversionTolerance));
  CHECK(l.hi == doctest::Approx(1205).epsilon(kConversionTolerance));
  CHECK(l.allowed_text() == "1.2 kHz \xC2\xB1 5 Hz");
  // A prefix alone takes the result's unit: "1.25k" = 1250 Hz, shown as kHz.
  l = loaded("result = \"f0_hz\"\nmax = \"1.25k\"\n");
  CHECK(l.hi == doctest::Approx(1250).epsilon(kConversionTolerance));
  CHECK(l.display_unit == "kHz");
  // A tolerance in % on a ratio result is in percentage points: 5 % ± 1 % = 0.04 … 0.06.
  l = loaded("result = \"thd\"\nnominal = \"5 %\"\ntolerance = \"1 %\"\n");
  CHECK(l.lo == doctest::Approx(0.04).epsilon(kConversionTolerance));
  CHECK(l.hi == doctest::Approx(0.06).epsilon(kConversionTolerance));
  CHECK(l.allowed_text() == "5 % \xC2\xB1 1 %");
  l = loaded("result = \"delay_s\"\nmax = \"250 us\"\n", "frf");
  CHECK(l.hi == doctest::Approx(2.5e-4).epsilon(kConversionTolerance));
  l = loaded("result = \"amplitude\"\nharmonic = 1\nnominal = 1\ntolerance = \"20 mV\"\n");
  CHECK(l.lo == doctest::Approx(0.98).epsilon(kConversionTolerance));
  CHECK(l.unit_base == "V");
  CHECK(l.allowed_text() == "1 \xC2\xB1 20 mV");
  // Degrees and radians: π/2 rad = 90°.
  l = loaded("result = \"phase_deg\"\nharmonic = 1\nmin = \"-5 deg\"\nmax = \"1.5707963267948966 rad\"\n");
  CHECK(l.lo == -5);
  CHECK(l.hi == doctest::Approx(90).epsilon(kConversionTolerance));
  // A dB tolerance about an amplitude ratio is a factor: −40 dB ± 2 dB = 10^(−42/20) … 10^(−38/20).
  l = loaded("result = \"mag\"\nharmonic = 1\nnominal = \"-40 dB\"\ntolerance = \"2 dB\"\n", "frf");
  CHECK(l.lo == doctest::Approx(std::pow(10.0, -42.0 / 20)).epsilon(kConversionTolerance));
  CHECK(l.hi == doctest::Approx(std::pow(10.0, -38.0 / 20)).epsilon(kConversionTolerance));
  CHECK(l.allowed_text() == "\xE2\x88\x92" "40 dB \xC2\xB1 2 dB");
}

TEST_CASE("limits: a bare THD bound above 1 is refused with how to write it") {
  const std::string head = "[analysis]\nmode = \"analyze\"\n[[limit]]\nresult = \"thd\"\n";
  CHECK(load_error(head + "max = 8\n") ==
        "limits.toml:5:7: thd max = 8 is a ratio of 8 (800 %); write \"8 %\" or 0.08");
  CHECK(load_error(head + "nominal = 0.05\ntolerance = 2\n") ==
        "limits.toml:6:13: thd tolerance = 2 is a ratio of 2 (200 %); write \"2 %\" or 0.02");
  CHECK(load_error("[analysis]\nmode = \"frf\"\norder = \"0/2\"\n[[limit]]\nresult = \"damping\"\n"
                   "pole = 1\nmin = 5\n") ==
        "limits.toml:7:7: damping min = 5 is a ratio of 5 (500 %); write \"5 %\" or 0.05");
  // The same numbers written with their unit, or as ratios, load.
  CHECK(load_error(head + "max = \"800 %\"\n") == "(no error)");
  CHECK(load_error(head + "max = 0.08\n") == "(no error)");
}

TEST_CASE("limits: a unit that does not fit the result is refused, naming what fits") {
  const std::string head = "[analysis]\nmode = \"analyze\"\n[[limit]]\n";
  CHECK(load_error(head + "result = \"thd\"\nmax = \"8 kHz\"\n") ==
        "limits.toml:5:7: max = \"8 kHz\": unit \"kHz\" does not fit thd; write a bare ratio, or a "
        "string in %, ppm or dB (20\xC2\xB7log10 of the ratio)");
  CHECK(load_error(head + "result = \"f0_hz\"\nnominal = 50\ntolerance = \"1 %\"\n") ==
        "limits.toml:6:13: tolerance = \"1 %\": unit \"%\" does not fit f0_hz; write a bare number in "
        "Hz, or a string in Hz with an SI prefix (\"1.2 kHz\") (a tolerance relative to the nominal "
        "is tolerance_pct = 1)");
  CHECK(load_error(head + "result = \"dc\"\nmax = \"5 %\"\n") ==
        "limits.toml:5:7: max = \"5 %\": unit \"%\" does not fit dc; write a bare number in the "
        "channel's unit, or a string in that unit with an SI prefix (\"2 mV\")");
  CHECK(load_error(head + "result = \"dc\"\nmin = \"1 mV\"\nmax = \"2 mA\"\n") ==
        "limits.toml:6:7: max is in A, another bound in V");
  CHECK(load_error("[analysis]\nmode = \"frf\"\norder = \"0/2\"\n[[limit]]\nresult = \"damping\"\n"
                   "pole = 1\nmin = \"-3 dB\"\n") ==
        "limits.toml:7:7: min = \"-3 dB\": unit \"dB\" does not fit damping; write a bare ratio, or a "
        "string in % or ppm");
}

TEST_CASE("limits: 8 % fails a 9.3 % THD, shown in %, with margins by hand") {
  const Limit l = loaded("result = \"thd\"\nmax = \"8 %\"\n");
  MeasurementSet m;
  m.set("thd", Quantity{0.093});
  const LimitOutcome o = evaluate_limit(l, m);
  CHECK_FALSE(o.passed);
  CHECK(o.verdict == "fail: outside the range");
  CHECK(o.measured_text == "9.3 % (no uncertainty known)");
  // By hand: 0.08 − 0.093 = −0.013 (outside: negative); one-sided width |0.08|: −0.013/0.08.
  CHECK(o.margin == doctest::Approx(-0.013).epsilon(kConversionTolerance));
  CHECK(o.margin_fraction == doctest::Approx(-0.1625).epsilon(kConversionTolerance));

  // Two-sided: 1 ± 0.02 at 1.005 ± 0.004 (k = 2): nearest bound 1.02, margin 0.015, width 0.04.
  Limit g;
  g.result = "dc_gain";
  g.nominal = 1.0;
  g.tolerance = 0.02;
  g = finished(g);
  m.set("dc_gain", Quantity::from_u(1.005, 0.002, 2));
  const LimitOutcome two = evaluate_limit(g, m);
  CHECK(two.passed);
  CHECK(two.measured_text == "1.005 (95 %: 1.001 \xE2\x80\xA6 1.009, k = 2)");
  CHECK(two.margin == doctest::Approx(0.015).epsilon(kConversionTolerance));
  CHECK(two.margin_fraction == doctest::Approx(0.375).epsilon(kConversionTolerance));
  // A bound at zero has no one-sided width: the fraction is undefined, the margin is not.
  Limit z;
  z.result = "delay_s";
  z.min = 0.0;
  z = finished(z);
  m.set("delay_s", Quantity{1e-3});
  const LimitOutcome zo = evaluate_limit(z, m);
  CHECK(zo.margin == doctest::Approx(1e-3));
  CHECK(std::isnan(zo.margin_fraction));
  // Yes/no results have no margin.
  Limit yn;
  yn.result = "linear";
  yn.expect = true;
  yn = finished(yn);
  m.set("linear", Quantity::exact(1));
  CHECK(std::isnan(evaluate_limit(yn, m).margin));
}

TEST_CASE("limits: a limit in volts is checked against the channel's unit") {
  const Limit l = loaded("result = \"dc\"\nmax = \"2 mV\"\n");
  CHECK(l.hi == doctest::Approx(0.002).epsilon(kConversionTolerance));
  MeasurementSet m;
  m.set("dc", Quantity::from_u(0.0015, 0.0001, 2));
  m.set_channel_unit("", "V");
  const LimitOutcome ok = evaluate_limit(l, m);
  CHECK(ok.passed);
  CHECK(ok.measured_text == "1.5 mV (95 %: 1.3 \xE2\x80\xA6 1.7, k = 2)");
  m.set_channel_unit("", "A");
  CHECK(evaluate_limit(l, m).verdict == "fail: the limit is in V, but the channel's unit is A");
  m.set_channel_unit("", "");
  CHECK(evaluate_limit(l, m).verdict ==
        "fail: the limit is in V, but the channel's unit is not known (set it in [read] unit)");
}

TEST_CASE("limits: [verdict] fail_on_flags replaces the default; unknown flags are refused") {
  auto c = parse_batch_config("", "limits.toml");
  CHECK(c.fail_on_flags == invalidating_flags());
  c = parse_batch_config("[verdict]\nfail_on_flags = [\"aliasing-risk\", \"few-periods\"]\n", "limits.toml");
  CHECK(c.fail_on_flags == std::vector<std::string>{"aliasing-risk", "few-periods"});
  c = parse_batch_config("[verdict]\nfail_on_flags = []\n", "limits.toml");
  CHECK(c.fail_on_flags.empty());
  const std::string e = load_error("[verdict]\nfail_on_flags = [\"cliped\"]\n");
  CHECK(e.rfind("limits.toml:2:18: unknown flag \"cliped\" (did you mean \"clipped\"? flags: clipped, ", 0) == 0);
  CHECK(load_error("[verdict]\nfail_on_flag = []\n") ==
        "limits.toml:2:1: unknown key \"fail_on_flag\" in [verdict] (did you mean \"fail_on_flags\"?)");
}

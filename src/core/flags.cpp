#include "core/flags.hpp"

namespace periodfit {

namespace {

// Severities are decided by what the flag's test establishes (docs/flags.md gives the reasons):
// a clipped or aliased record is not the waveform the harmonics describe, an unconverged fit is
// not the least-squares estimate, and a channel without a harmonic above the noise has only
// noise for its harmonic figures; the others qualify numbers that still hold.
const std::vector<FlagInfo> kFlags = {
    {Flag::clipped, "clipped", FlagSeverity::invalidates, "analyze",
     "samples sit at the record's extreme in flat runs: the harmonics describe the flattened "
     "waveform, not the signal"},
    {Flag::aliasing_risk, "aliasing-risk", FlagSeverity::invalidates, "analyze",
     "a significant harmonic above 0.4·fs within 60 dB of the fundamental: harmonics beyond fs/2 "
     "may have folded onto the reported ones"},
    {Flag::not_converged, "not-converged", FlagSeverity::invalidates, "analyze",
     "the f0 fit stopped without converging: f0, and every harmonic taken at its multiples, may be off"},
    {Flag::dc_only, "dc-only", FlagSeverity::invalidates, "analyze",
     "no harmonic stands out of the noise: f0 and the harmonic figures (THD, SINAD, amplitudes, "
     "phases) are noise"},
    {Flag::not_periodic, "not-periodic", FlagSeverity::invalidates, "analyze",
     "the harmonics of the f0 found explain little of the signal's line power (two tones, "
     "modulation): f0 and the harmonic figures do not describe one periodic signal"},
    {Flag::forced_f0_off, "forced-f0-off", FlagSeverity::invalidates, "analyze",
     "the forced f0 differs from the data's own f0 by more than 4 of its uncertainties: phases turn "
     "and amplitudes shrink over the record, far beyond their uncertainties"},
    {Flag::model_not_converged, "model-not-converged", FlagSeverity::invalidates, "frf",
     "the model fit stopped without converging: its parameters are not the least-squares estimate"},
    {Flag::few_periods, "few-periods", FlagSeverity::caution, "analyze, frf",
     "few periods in the record (analyze: < 2; frf: < 4 whole periods, noise from the bins "
     "between harmonics): the figures rest on little data"},
    {Flag::baseline_drift, "baseline-drift", FlagSeverity::caution, "analyze",
     "a slow trend under the signal was fitted (Legendre, degree ≤ 2) and kept out of the noise "
     "figures: dc is the record's mean and the trend's size is reported"},
    {Flag::interference, "interference", FlagSeverity::caution, "analyze",
     "a line beside the harmonics (hum, another source) carries part of the residual: it counts "
     "as noise in THD+N, SINAD and SNR"},
    {Flag::identical_periods, "identical-periods", FlagSeverity::caution, "analyze",
     "the periods repeat exactly (a coherent capture): period-to-period scatter cannot show the "
     "error, so the uncertainties come from the residual or the quantisation step (Δ/√12) over one "
     "period"},
    {Flag::harmonics_truncated, "harmonics-truncated", FlagSeverity::caution, "analyze, frf",
     "significant harmonics lie above the count asked for (--harmonics): they count as noise in "
     "SNR, THD+N and SINAD, f0 and its u rest on fewer lines, and the frf model's adequacy test "
     "sees only the lines kept"},
    {Flag::drift, "drift", FlagSeverity::caution, "analyze",
     "f0 differs between the halves of the record: the figures are averages over the record"},
    {Flag::nonlinear, "nonlinear", FlagSeverity::caution, "frf",
     "output power above the noise at harmonics the input does not excite: the FRF holds for this "
     "excitation level only"},
    {Flag::model_inadequate, "model-inadequate", FlagSeverity::caution, "frf",
     "the model's cost lies outside the band a correct model reaches: model-derived numbers are "
     "those of an approximation"},
    {Flag::unstable_pole, "unstable-pole", FlagSeverity::caution, "frf",
     "the fitted model has a pole in the right half-plane"},
    {Flag::ill_conditioned, "ill-conditioned", FlagSeverity::caution, "frf",
     "the fit's scaled Jacobian has a condition number above 1e10: the parameters' uncertainties "
     "are not reliable"},
    {Flag::parameter_u_undefined, "parameter-u-undefined", FlagSeverity::caution, "frf",
     "weights from 6 periods or fewer: the parameters' variance does not exist to first order, and "
     "their u carries only the first-moment correction"},
    {Flag::numerical_floor, "numerical-floor", FlagSeverity::info, "frf",
     "a noise-free record: some variances were raised to the numerical floor (1e-12 of |H|)"},
    {Flag::truncation_visible, "truncation-visible", FlagSeverity::caution, "steady-state",
     "the harmonic series was cut where the waveform still carries visible energy: samples, min, "
     "max and ripple show the truncation"},
    {Flag::gibbs, "gibbs", FlagSeverity::info, "steady-state",
     "the waveform has jumps: a truncated series overshoots near them (Gibbs phenomenon)"},
    {Flag::no_fundamental, "no-fundamental", FlagSeverity::info, "steady-state",
     "the predicted output has no line at the fundamental: its THD is undefined"},
};

}  // namespace

const char* severity_name(FlagSeverity severity) {
  switch (severity) {
    case FlagSeverity::invalidates: return "invalidates";
    case FlagSeverity::caution: return "caution";
    case FlagSeverity::info: return "info";
  }
  return "invalidates";
}

const std::vector<FlagInfo>& flag_catalogue() { return kFlags; }

const FlagInfo& flag_info(Flag flag) {
  // kFlags lists the flags in the enum's order (tests/flags_test.cpp, "every Flag has its row").
  return kFlags[static_cast<std::size_t>(flag)];
}

std::string_view code(Flag flag) { return flag_info(flag).code; }

std::vector<std::string> codes(const std::vector<Flag>& flags) {
  std::vector<std::string> out;
  out.reserve(flags.size());
  for (Flag f : flags) out.emplace_back(code(f));
  return out;
}

std::string_view code(Status status) {
  switch (status) {
    case Status::ok: return "ok";
    case Status::not_converged: return code(Flag::not_converged);
    case Status::model_inadequate: return code(Flag::model_inadequate);
    case Status::model_not_converged: return code(Flag::model_not_converged);
    case Status::truncation_visible: return code(Flag::truncation_visible);
  }
  return "ok";
}

std::string_view code(LinearityStatus status) {
  switch (status) {
    case LinearityStatus::linear: return "linear";
    case LinearityStatus::nonlinear: return "nonlinear";
    case LinearityStatus::untested: return "untested";
  }
  return "untested";
}

const FlagInfo* find_flag(std::string_view code) {
  for (const auto& f : kFlags)
    if (f.code == code) return &f;
  return nullptr;
}

std::string_view flag_code(std::string_view flag) {
  // Codes never hold ':'; a channel name before ": " may.
  const auto at = flag.rfind(": ");
  return at == std::string_view::npos ? flag : flag.substr(at + 2);
}

std::vector<std::string> invalidating_flags() {
  std::vector<std::string> out;
  for (const auto& f : kFlags)
    if (f.severity == FlagSeverity::invalidates) out.emplace_back(f.code);
  return out;
}

}  // namespace periodfit

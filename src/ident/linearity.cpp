#include "ident/linearity.hpp"

#include <algorithm>
#include <boost/math/distributions/fisher_f.hpp>
#include <cmath>

#include "core/error.hpp"
#include "core/number_format.hpp"

namespace periodfit::ident {

void LinearityOptions::validate() const {
  if (!(false_alarm > 0 && false_alarm < 1))
    throw OptionError("false_alarm", format_shortest(false_alarm), "must be in (0, 1)");
  if (!std::isfinite(min_level_dbc) || min_level_dbc > 0)
    throw OptionError("min_level_dbc", format_shortest(min_level_dbc),
                      "must be finite and <= 0");
}

LinearityResult check_linearity(const FrfResult& frf, const dsp::PeriodSpectra& output,
                                const LinearityOptions& options) {
  options.validate();
  LinearityResult r;
  r.dof = frf.output_noise_dof;
  if (output.mean.size() != frf.output_noise_floor.size())
    throw AnalysisError("linearity: output spectrum does not match the FRF");
  std::vector<int> tested;
  for (int n : frf.unexcited)
    if (frf.output_noise_floor[std::size_t(n)] > 0) tested.push_back(n);
  r.tested = int(tested.size());
  if (tested.empty() || r.dof < 1) {
    r.status = "untested";
    if (frf.unexcited.empty())
      r.reason = "the input excites every harmonic up to " + std::to_string(frf.max_harmonic) +
                 ", so none is left free to show distortion; an input with unexcited harmonics (e.g. a "
                 "multisine with gaps from periodfit excite) allows the test";
    else if (r.dof < 1)
      r.reason = "the output noise floor has no degrees of freedom to test against";
    else
      r.reason = "the output noise floor is zero at every unexcited harmonic, so no line can be tested against it";
    return r;
  }
  double excited_power = 0, max_excited = 0;
  for (const auto& p : frf.points) {
    excited_power += std::norm(p.y);
    max_excited = std::max(max_excited, std::abs(p.y));
  }
  const double alpha = options.false_alarm / double(tested.size());
  const double threshold = boost::math::quantile(
      boost::math::complement(boost::math::fisher_f_distribution<double>(2.0, double(r.dof)), alpha));
  r.threshold_db = 10 * std::log10(threshold);
  const double min_amplitude = max_excited * std::pow(10.0, options.min_level_dbc / 20);

  double odd_power = 0, even_power = 0;
  for (int n : tested) {
    const auto i = std::size_t(n);
    const double amplitude = std::abs(output.mean[i]);
    const double ratio = std::norm(output.mean[i]) / frf.output_noise_floor[i];
    if (!(ratio > threshold) || amplitude <= min_amplitude) continue;
    DistortionLine line;
    line.n = n;
    line.freq_hz = double(n) * frf.f0_hz;
    line.amplitude = amplitude;
    line.level_dbc = 20 * std::log10(amplitude / max_excited);
    line.above_floor_db = 10 * std::log10(ratio);
    if (n % 2 == 0) {
      r.even.push_back(line);
      even_power += amplitude * amplitude;
    } else {
      r.odd.push_back(line);
      odd_power += amplitude * amplitude;
    }
  }
  r.nonlinear = !r.odd.empty() || !r.even.empty();
  r.status = r.nonlinear ? "nonlinear" : "linear";
  if (r.nonlinear) r.level_db = 10 * std::log10((odd_power + even_power) / excited_power);
  if (!r.odd.empty()) r.odd_level_db = 10 * std::log10(odd_power / excited_power);
  if (!r.even.empty()) r.even_level_db = 10 * std::log10(even_power / excited_power);
  return r;
}

}  // namespace periodfit::ident

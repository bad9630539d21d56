#include "predict/input_series.hpp"

#include <charconv>
#include <limits>
#include <string>

#include "core/error.hpp"

namespace periodfit::predict {

dsp::HarmonicTerm parse_harmonic_term(std::string_view text) {
  const std::string whole(text);
  const auto bad = [&](const std::string& why) { return OptionError("harmonic", whole, why); };
  const std::size_t c1 = text.find(':');
  const std::size_t c2 = c1 == std::string_view::npos ? c1 : text.find(':', c1 + 1);
  if (c2 == std::string_view::npos || text.find(':', c2 + 1) != std::string_view::npos)
    throw bad("expected n:amplitude:phase_deg, e.g. 3:0.25:-90");
  const std::string_view parts[3] = {text.substr(0, c1), text.substr(c1 + 1, c2 - c1 - 1), text.substr(c2 + 1)};
  dsp::HarmonicTerm t;
  {
    const auto [p, ec] = std::from_chars(parts[0].data(), parts[0].data() + parts[0].size(), t.n);
    if (parts[0].empty() || ec != std::errc{} || p != parts[0].data() + parts[0].size())
      throw bad("the harmonic number \"" + std::string(parts[0]) + "\" is not a whole number");
  }
  double* fields[2] = {&t.amplitude, &t.phase_deg};
  const char* names[2] = {"amplitude", "phase"};
  for (int i = 0; i < 2; ++i) {
    const std::string_view f = parts[i + 1];
    const auto [p, ec] = std::from_chars(f.data(), f.data() + f.size(), *fields[i]);
    if (f.empty() || ec != std::errc{} || p != f.data() + f.size())
      throw bad(std::string("the ") + names[i] + " \"" + std::string(f) + "\" is not a number");
  }
  return t;
}

dsp::SeriesTruncation series_from_measurement(double f0_hz, double dc,
                                              const std::vector<std::complex<double>>& phasors) {
  dsp::SeriesTruncation s;
  s.series.f0_hz = f0_hz;
  s.series.phasors.push_back(dc);
  s.series.phasors.insert(s.series.phasors.end(), phasors.begin(), phasors.end());
  s.harmonics = static_cast<int>(phasors.size());
  s.left_out_fraction = std::numeric_limits<double>::quiet_NaN();
  s.method = dsp::SeriesCount::measured;
  return s;
}

MeasuredInput measured_input(const dsp::ChannelAnalysis& an) {
  MeasuredInput m;
  std::vector<std::complex<double>> phasors;
  m.u.dc_var = an.dc_u * an.dc_u;
  m.u.phasor_cov.push_back({0.0, 0.0, 0.0});
  for (const auto& h : an.harmonics) {
    phasors.push_back(h.phasor);
    m.u.phasor_cov.push_back({h.cov_re_re, h.cov_im_im, h.cov_re_im});
  }
  m.series = series_from_measurement(an.fundamental.f0_hz, an.dc, phasors);
  return m;
}

}  // namespace periodfit::predict

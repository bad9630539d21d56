#include "report/result_plots.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace periodfit::report {

namespace {

constexpr std::size_t kReconstructionPoints = 400;

std::string channel_pair(const ident::IdentifyResult& r) {
  return r.input_channel + " \xE2\x86\x92 " + r.output_channel;
}

}  // namespace

Figure identify_bode_figure(const ident::IdentifyResult& r, const std::string& title) {
  BodePlotData b;
  b.id = "bode";
  b.title = title.empty() ? "Bode: " + channel_pair(r) : title;
  for (const auto& p : r.frf.points) {
    b.freq_hz.push_back(p.freq_hz);
    b.mag.push_back(p.mag);
    b.mag_u95.push_back(std::max(p.mag_hi - p.mag, p.mag - p.mag_lo));
    b.phase_deg.push_back(p.phase_deg);
    // An undefined phase (|H| consistent with 0) gets the whole circle as its bar.
    b.phase_u95_deg.push_back(p.phase_defined ? std::max(p.phase_hi_deg - p.phase_deg, p.phase_deg - p.phase_lo_deg)
                                              : 180.0);
  }
  const int percent = static_cast<int>(std::lround(r.frf.confidence * 100));
  b.measured_label = "measured, " + std::to_string(percent) + " % interval";
  if (r.model) {
    const ident::RationalModel model = r.model->model;
    b.model = [model](double f_hz) { return model.response(2 * std::numbers::pi * f_hz); };
    b.model_label = "fitted model " + ident::order_text(r.model->order) + (model.delay_s != 0 ? " with delay" : "");
  }
  return bode_figure(b);
}

Figure identify_spectrum_figure(const ident::IdentifyResult& r, const std::string& title) {
  SpectrumPlotData s;
  s.id = "spectrum";
  s.title = title.empty() ? "Output spectrum: " + r.output_channel : title;
  s.unit = r.output_unit;
  std::vector<std::pair<int, double>> lines;
  for (const auto& p : r.frf.points) lines.emplace_back(p.n, std::abs(p.y));
  for (const auto* group : {&r.linearity.odd, &r.linearity.even})
    for (const auto& d : *group) lines.emplace_back(d.n, d.amplitude);
  std::sort(lines.begin(), lines.end());
  for (const auto& [n, a] : lines) {
    s.harmonic.push_back(n);
    s.amplitude.push_back(a);
    const auto nn = static_cast<std::size_t>(n);
    // The floor is the variance of the averaged phasor; its square root is the amplitude a
    // noise-only harmonic would typically show.
    s.noise_floor.push_back(nn < r.frf.output_noise_floor.size() ? std::sqrt(r.frf.output_noise_floor[nn])
                                                                 : std::nan(""));
  }
  return spectrum_figure(s);
}

double whole_period_mean(const Channel& channel, double sample_rate_hz, double f0_hz) {
  const std::size_t n = channel.samples.size();
  std::size_t count = n;
  if (f0_hz > 0 && sample_rate_hz > 0) {
    const double per_period = sample_rate_hz / f0_hz;
    const double periods = std::floor(static_cast<double>(n) / per_period);
    if (periods >= 1) count = std::min(n, static_cast<std::size_t>(std::llround(periods * per_period)));
  }
  if (count == 0) return 0;
  double sum = 0;
  for (std::size_t i = 0; i < count; ++i) sum += channel.samples[i];
  return sum / static_cast<double>(count);
}

Figure waveform_period_figure(const Capture& capture, const Channel& channel, double f0_hz,
                              double dc, const std::vector<HarmonicPhasor>& harmonics,
                              const std::string& title, const std::string& fit_label) {
  WaveformPlotData w;
  w.id = "waveform";
  w.title = title;
  w.quantity = channel.name;
  w.unit = channel.unit;
  w.fit_label = fit_label;
  const double fs = capture.sample_rate_hz;
  if (!(f0_hz > 0) || !(fs > 0)) return waveform_figure(w);
  const double period = 1.0 / f0_hz;
  const double t_start = capture.t0_s;
  for (std::size_t k = 0; k < channel.samples.size(); ++k) {
    const double t = static_cast<double>(k) / fs;
    if (t >= period) break;
    w.t_s.push_back(t);
    w.y.push_back(channel.samples[k]);
  }
  const double w0 = 2 * std::numbers::pi * f0_hz;
  for (std::size_t k = 0; k <= kReconstructionPoints; ++k) {
    const double t = period * static_cast<double>(k) / kReconstructionPoints;
    double v = dc;
    for (const auto& h : harmonics)
      v += std::abs(h.phasor) * std::cos(h.n * w0 * (t_start + t) + std::arg(h.phasor));
    w.fit_t_s.push_back(t);
    w.fit_y.push_back(v);
  }
  return waveform_figure(w);
}

std::vector<Figure> identify_figures(const Capture& capture, const ident::IdentifyResult& r) {
  std::vector<Figure> figs;
  figs.push_back(identify_bode_figure(r));
  figs.push_back(identify_spectrum_figure(r));
  const std::size_t out = capture.channel_index(r.output_channel);
  const Channel& channel = capture.channels[out];
  const double f0 = r.fundamental.f0_hz;
  std::vector<HarmonicPhasor> harmonics;
  for (const auto& p : r.frf.points) harmonics.push_back({p.n, p.y});
  // The distortion lines carry amplitudes only; they are left out of the reconstruction,
  // which is labelled accordingly.
  figs.push_back(waveform_period_figure(capture, channel, f0, whole_period_mean(channel, capture.sample_rate_hz, f0),
                                        harmonics, "One period of " + channel.name,
                                        "excited harmonics + dc"));
  return figs;
}

Figure analyze_spectrum_figure(const dsp::ChannelAnalysis& channel, const std::string& title) {
  SpectrumPlotData s;
  s.id = "spectrum";
  s.title = title.empty() ? "Harmonic spectrum: " + channel.name : title;
  s.unit = channel.unit;
  for (const auto& h : channel.harmonics) {
    s.harmonic.push_back(h.n);
    s.amplitude.push_back(h.amplitude);
    if (channel.noise_floor > 0) s.noise_floor.push_back(channel.noise_floor);
  }
  return spectrum_figure(s);
}

Figure analyze_spectra_figure(const dsp::AnalyzeReport& report) {
  Figure fig;
  fig.id = "spectra";
  fig.title = "Harmonic spectrum: " + report.source;
  for (const auto& c : report.channels) {
    Figure one = analyze_spectrum_figure(c);
    for (auto& panel : one.panels) {
      panel.title = c.name;
      fig.panels.push_back(std::move(panel));
    }
  }
  return fig;
}

Figure analyze_waveform_figure(const Capture& capture, const dsp::ChannelAnalysis& channel,
                               const std::string& title) {
  std::vector<HarmonicPhasor> harmonics;
  for (const auto& h : channel.harmonics) harmonics.push_back({h.n, h.phasor});
  const Channel& samples = capture.channels[capture.channel_index(channel.name)];
  return waveform_period_figure(capture, samples, channel.fundamental.f0_hz, channel.dc, harmonics,
                                title.empty() ? "One period of " + channel.name : title,
                                "dc + " + std::to_string(channel.harmonics.size()) + " harmonics");
}

}  // namespace periodfit::report

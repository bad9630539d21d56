#include "io/info.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "core/number_format.hpp"

namespace periodfit::io {

namespace {

// Neumaier's compensated sum (an improved Kahan summation): the rounding error of each
// addition is carried, so the sum of N terms is accurate to about one rounding, not N.
class CompensatedSum {
 public:
  void add(double x) {
    const double t = sum_ + x;
    // Both candidates are computed so the choice compiles to a select, not a branch.
    const double big_sum = (sum_ - t) + x;
    const double big_x = (x - t) + sum_;
    carry_ += std::fabs(sum_) >= std::fabs(x) ? big_sum : big_x;
    sum_ = t;
  }
  double value() const { return sum_ + carry_; }

 private:
  double sum_ = 0;
  double carry_ = 0;
};

// Values within this fraction of the span of a lattice point count as on it: far below any
// code step (a 24-bit converter's is 6e-8 of full scale) and above the rounding of parsed
// decimal text (1e-16 relative).
constexpr double kLatticeTolerance = 1e-10;
// A lattice finer than 2^-32 of the span is not a converter's: the values are continuous.
constexpr int kFinestLatticeBits = 32;

}  // namespace

const char* rate_source_code(TimeBase::Source source) {
  switch (source) {
    case TimeBase::Source::time_column: return "time-column";
    case TimeBase::Source::preamble: return "preamble";
    case TimeBase::Source::rate_option: return "rate-option";
    case TimeBase::Source::audio_header: return "audio-header";
  }
  return "audio-header";
}

ChannelStats channel_stats(const Channel& channel) {
  assert(!channel.samples.empty());
  ChannelStats s;
  s.name = channel.name;
  s.unit = channel.unit;
  s.min = channel.samples.front();
  s.max = channel.samples.front();
  for (double x : channel.samples) {
    s.min = std::min(s.min, x);
    s.max = std::max(s.max, x);
  }
  // Sums of x/scale with scale the power of two at the top of |x| (an exact division): x² of
  // values near DBL_MAX would overflow to inf and of subnormals underflow to 0
  // (docs/robustness.md, entries 10 and 11).
  const double top = std::max(std::fabs(s.min), std::fabs(s.max));
  const double scale = top > 0 ? std::ldexp(1.0, std::ilogb(top)) : 1.0;
  CompensatedSum sum, squares;
  for (double x : channel.samples) {
    const double y = x / scale;
    sum.add(y);
    squares.add(y * y);
  }
  const auto n = static_cast<double>(channel.samples.size());
  s.mean = sum.value() / n * scale;
  s.rms = std::sqrt(squares.value() / n) * scale;
  // The ac part as a second, centred pass: rms² − mean² cancels when dc dominates.
  const double centre = s.mean / scale;
  CompensatedSum centred;
  for (double x : channel.samples) {
    const double y = x / scale - centre;
    centred.add(y * y);
  }
  s.ac_rms = std::sqrt(centred.value() / n) * scale;

  // The code step: the lattice every value sits on (values = offset + integer × step), found
  // as the greatest common divisor of the differences between sorted distinct values (Euclid's
  // algorithm on reals, with a tolerance). A smooth tone skips codes, so the smallest difference
  // seen overstates the step; the GCD does not. Continuous values (no lattice finer than
  // kFinestLatticeBits over the span) report 0.
  std::vector<double> sorted(channel.samples);
  std::sort(sorted.begin(), sorted.end());
  s.levels = sorted.empty() ? 0 : 1;
  const double span = s.max - s.min;
  const double tolerance = kLatticeTolerance * span;
  auto real_gcd = [tolerance](double a, double b) {
    while (b > tolerance) {
      const double r = std::fmod(a, b);
      a = b;
      b = std::min(r, b - r) > tolerance ? r : 0;
    }
    return a;
  };
  double step = 0;
  for (std::size_t i = 1; i < sorted.size(); ++i) {
    if (sorted[i] == sorted[i - 1]) continue;
    ++s.levels;
    const double d = sorted[i] - sorted[i - 1];
    step = step == 0 ? d : real_gcd(std::max(step, d), std::min(step, d));
  }
  s.code_step = std::isfinite(step) && step > std::ldexp(span, -kFinestLatticeBits) ? step : 0;

  if (s.min < s.max) {
    const auto& x = channel.samples;
    for (std::size_t i = 0; i < x.size();) {
      std::size_t j = i + 1;
      while (j < x.size() && x[j] == x[i]) ++j;
      if (j - i >= kFlatRun && (x[i] == s.min || x[i] == s.max)) s.flat_at_extremes += j - i;
      i = j;
    }
  }
  return s;
}

CaptureInfo describe(const Capture& capture) {
  CaptureInfo info;
  info.source = capture.source;
  info.format = capture.format;
  info.sample_rate_hz = capture.sample_rate_hz;
  info.t0_s = capture.t0_s;
  info.samples = capture.sample_count();
  info.duration_s = capture.duration_s();
  for (const auto& channel : capture.channels) info.channels.push_back(channel_stats(channel));
  info.metadata = capture.metadata;
  info.time_base = capture.time_base;
  return info;
}

}  // namespace periodfit::io

#include "io/info.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "io/number_format.hpp"
#include "report/table.hpp"

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

}  // namespace

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
  return info;
}

nlohmann::ordered_json info_json(const CaptureInfo& info) {
  nlohmann::ordered_json j;
  j["source"] = info.source;
  j["format"] = info.format;
  j["sample_rate_hz"] = info.sample_rate_hz;
  j["t0_s"] = info.t0_s;
  j["samples"] = info.samples;
  j["duration_s"] = info.duration_s;
  j["channels"] = nlohmann::ordered_json::array();
  for (const auto& c : info.channels) {
    nlohmann::ordered_json cj;
    cj["name"] = c.name;
    cj["unit"] = c.unit;
    cj["min"] = c.min;
    cj["max"] = c.max;
    cj["mean"] = c.mean;
    cj["rms"] = c.rms;
    j["channels"].push_back(std::move(cj));
  }
  j["metadata"] = nlohmann::ordered_json::array();
  for (const auto& [key, value] : info.metadata)
    j["metadata"].push_back(nlohmann::ordered_json{{"key", key}, {"value", value}});
  return j;
}

nlohmann::ordered_json info_json(const std::vector<CaptureInfo>& files) {
  nlohmann::ordered_json j;
  j["periodfit_info"] = 1;
  j["files"] = nlohmann::ordered_json::array();
  for (const auto& f : files) j["files"].push_back(info_json(f));
  return j;
}

std::string info_text(const CaptureInfo& info) {
  // The summary line names at most kListedNames channels; the table below lists them all.
  constexpr std::size_t kListedNames = 8;
  std::string names;
  for (std::size_t i = 0; i < info.channels.size() && i < kListedNames; ++i)
    names += (i ? ", " : "") + info.channels[i].name;
  if (info.channels.size() > kListedNames)
    names += ", … " + std::to_string(info.channels.size() - kListedNames) + " more";
  std::string out = info.source + "\n";
  out += report::render_key_values(
      {
          {"format", info.format},
          {"channels", std::to_string(info.channels.size()) + " (" + names + ")"},
          {"sample rate", format_significant(info.sample_rate_hz, 9) + " Hz"},
          {"samples", std::to_string(info.samples)},
          {"duration", format_significant(info.duration_s, 9) + " s"},
          {"t0", format_significant(info.t0_s, 9) + " s"},
      },
      2);
  out += "\n";
  using Align = report::Table::Align;
  report::Table table({{"channel", Align::left},
                       {"unit", Align::left},
                       {"min", Align::right},
                       {"max", Align::right},
                       {"mean", Align::right},
                       {"rms", Align::right}});
  for (const auto& c : info.channels)
    table.add_row({c.name, c.unit.empty() ? "-" : c.unit, format_significant(c.min),
                   format_significant(c.max), format_significant(c.mean), format_significant(c.rms)});
  out += table.render(2);
  if (!info.metadata.empty()) {
    out += "\n  metadata\n";
    out += report::render_key_values(info.metadata, 4);
  }
  return out;
}

}  // namespace periodfit::io

#include "store/production_stats.hpp"

#include <algorithm>
#include <boost/math/distributions/chi_squared.hpp>
#include <boost/math/distributions/normal.hpp>
#include <cmath>
#include <numeric>

#include "core/error.hpp"
#include "core/number_format.hpp"

namespace periodfit::store {

void CapabilityOptions::validate() const {
  if (!(confidence > 0 && confidence < 1))
    throw OptionError("confidence", format_shortest(confidence), "must be in (0, 1)");
}

std::string_view code(StatisticStatus status) {
  switch (status) {
    case StatisticStatus::ok: return "ok";
    case StatisticStatus::too_few_values: return "too few values";
    case StatisticStatus::no_spread: return "no spread";
    case StatisticStatus::no_limits: return "no limits";
  }
  return "ok";
}

Capability capability(const std::vector<double>& values, double lsl, double usl, const CapabilityOptions& options) {
  options.validate();
  Capability c;
  c.n = values.size();
  c.lsl = lsl;
  c.usl = usl;
  c.confidence = options.confidence;
  if (c.n == 0) {
    c.status = StatisticStatus::too_few_values;
    return c;
  }
  c.mean = std::accumulate(values.begin(), values.end(), 0.0) / static_cast<double>(c.n);
  c.min = *std::min_element(values.begin(), values.end());
  c.max = *std::max_element(values.begin(), values.end());
  if (c.n < 2) {
    c.status = StatisticStatus::too_few_values;
    return c;
  }
  double ss = 0;
  for (double v : values) ss += (v - c.mean) * (v - c.mean);
  const double nu = static_cast<double>(c.n - 1);
  c.sd = std::sqrt(ss / nu);
  if (!std::isfinite(lsl) && !std::isfinite(usl)) {
    c.status = StatisticStatus::no_limits;
    return c;
  }
  if (!(c.sd > 0)) {
    c.status = StatisticStatus::no_spread;
    return c;
  }
  const double alpha = 1 - options.confidence;
  if (std::isfinite(lsl) && std::isfinite(usl)) {
    c.cp = (usl - lsl) / (6 * c.sd);
    const boost::math::chi_squared chi2(nu);
    c.cp_lo = c.cp * std::sqrt(boost::math::quantile(chi2, alpha / 2) / nu);
    c.cp_hi = c.cp * std::sqrt(boost::math::quantile(chi2, 1 - alpha / 2) / nu);
  }
  const double upper = std::isfinite(usl) ? (usl - c.mean) / (3 * c.sd) : std::numeric_limits<double>::infinity();
  const double lower = std::isfinite(lsl) ? (c.mean - lsl) / (3 * c.sd) : std::numeric_limits<double>::infinity();
  c.cpk = std::min(upper, lower);
  const double z = boost::math::quantile(boost::math::normal(), 1 - alpha / 2);
  const double n = static_cast<double>(c.n);
  const double half = z * std::sqrt(1 / (9 * n) + c.cpk * c.cpk / (2 * (n - 1)));
  c.cpk_lo = c.cpk - half;
  c.cpk_hi = c.cpk + half;
  return c;
}

ControlChart individuals_chart(const std::vector<double>& values) {
  ControlChart ch;
  ch.x = values;
  ch.mr.assign(values.size(), ControlChart::nan);
  if (values.size() < 2) {
    ch.status = StatisticStatus::too_few_values;
    return ch;
  }
  ch.centre = std::accumulate(values.begin(), values.end(), 0.0) / static_cast<double>(values.size());
  double sum = 0;
  for (std::size_t i = 1; i < values.size(); ++i) {
    ch.mr[i] = std::abs(values[i] - values[i - 1]);
    sum += ch.mr[i];
  }
  ch.mr_bar = sum / static_cast<double>(values.size() - 1);
  ch.sigma = ch.mr_bar / kD2;
  ch.ucl = ch.centre + kE2 * ch.mr_bar;
  ch.lcl = ch.centre - kE2 * ch.mr_bar;
  ch.mr_ucl = kD4 * ch.mr_bar;

  // Runs are counted point by point; a rule signals at the point that completes its pattern
  // and again at every further point that extends it (common practice in charting software
  // is to mark each such point).
  int side_run = 0, side = 0, trend_run = 1, trend = 0, alternate_run = 1, last_step = 0;
  for (std::size_t i = 0; i < values.size(); ++i) {
    const double v = values[i];
    if (v > ch.ucl || v < ch.lcl)
      ch.signals.push_back({1, i, "rule 1: beyond the " + std::string(v > ch.ucl ? "upper" : "lower") + " control limit"});
    const int s = v > ch.centre ? 1 : (v < ch.centre ? -1 : 0);
    side_run = s != 0 && s == side ? side_run + 1 : (s != 0 ? 1 : 0);
    side = s;
    if (side_run >= 9)
      ch.signals.push_back({2, i, "rule 2: " + std::to_string(side_run) + " points in a row " +
                                      (s > 0 ? "above" : "below") + " the centre line"});
    if (i == 0) continue;
    const int step = values[i] > values[i - 1] ? 1 : (values[i] < values[i - 1] ? -1 : 0);
    trend_run = step != 0 && step == trend ? trend_run + 1 : (step != 0 ? 2 : 1);
    trend = step;
    if (trend_run >= 6)
      ch.signals.push_back({3, i, "rule 3: " + std::to_string(trend_run) + " points in a row steadily " +
                                      (step > 0 ? "increasing" : "decreasing")});
    alternate_run = step != 0 && last_step != 0 && step == -last_step ? alternate_run + 1 : (step != 0 ? 2 : 1);
    last_step = step;
    if (alternate_run >= 14)
      ch.signals.push_back({4, i, "rule 4: " + std::to_string(alternate_run) + " points in a row alternating up and down"});
  }
  return ch;
}

}  // namespace periodfit::store

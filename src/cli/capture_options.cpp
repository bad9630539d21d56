#include "cli/capture_options.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>

#include "core/error.hpp"
#include "core/number_format.hpp"
#include "io/quantity.hpp"

namespace periodfit::cli {

std::pair<std::string, std::string> split_assignment(std::string_view text, std::string_view option) {
  const std::size_t at = text.rfind('=');
  if (at == std::string_view::npos)
    throw CLI::ValidationError(std::string(option), "expected CH=VALUE, found \"" + std::string(text) + "\"");
  const std::string channel(text.substr(0, at));
  const std::string value(text.substr(at + 1));
  if (channel.empty())
    throw CLI::ValidationError(std::string(option), "no channel before '=' in \"" + std::string(text) + "\"");
  if (value.empty())
    throw CLI::ValidationError(std::string(option), "no value after '=' in \"" + std::string(text) + "\"");
  return {channel, value};
}

CLI::Option* add_frequency_option(CLI::App& app, const std::string& name, double& hz, const std::string& help) {
  return app
      .add_option_function<std::string>(
          name,
          [name, &hz](const std::string& text) {
            const auto value = io::parse_frequency(text);
            if (!value) throw Error(name + ": \"" + text + "\" is not a frequency (e.g. 48k, 1MHz)");
            hz = *value;
          },
          help)
      ->default_str(format_shortest(hz))
      ->type_name("HZ");
}

CLI::Option* add_duration_option(CLI::App& app, const std::string& name, double& seconds, const std::string& help) {
  return app
      .add_option_function<std::string>(
          name,
          [name, &seconds](const std::string& text) {
            const auto value = io::parse_duration(text);
            if (!value) throw Error(name + ": \"" + text + "\" is not a time (e.g. 12ns, 1.5ms)");
            seconds = *value;
          },
          help)
      ->default_str(format_shortest(seconds))
      ->type_name("SECONDS");
}

std::vector<std::string> channel_selector_warnings(const Capture& capture, const std::vector<std::string>& selectors,
                                                   const io::ReadOptions& read) {
  std::vector<std::string> all = selectors;
  for (const auto& s : read.scales) all.push_back(s.first);
  for (const auto& u : read.units) all.push_back(u.first);
  std::vector<std::string> warnings;
  for (const auto& selector : all)
    if (auto w = capture.channel_selector_warning(selector);
        !w.empty() && std::find(warnings.begin(), warnings.end(), w) == warnings.end())
      warnings.push_back(std::move(w));
  return warnings;
}

double parse_full_scale(std::string_view text, std::string_view option) {
  const auto number = [&](std::string_view part, double& out) {
    const char* end = part.data() + part.size();
    const auto [ptr, ec] = std::from_chars(part.data(), end, out);
    return ec == std::errc{} && ptr == end && !part.empty() && std::isfinite(out);
  };
  const std::size_t colon = text.find(':');
  double lo = 0, hi = 0;
  if (colon == std::string_view::npos) {
    if (number(text, hi) && hi > 0) return hi;
  } else if (number(text.substr(0, colon), lo) && number(text.substr(colon + 1), hi) && hi > lo &&
             std::isfinite(hi - lo)) {
    return hi - lo;
  }
  throw CLI::ValidationError(std::string(option), "expected a peak-to-peak range > 0 (e.g. 2) or MIN:MAX with "
                                                  "MIN < MAX (e.g. -1:1), found \"" + std::string(text) + "\"");
}

FundamentalOptions add_fundamental_options(CLI::App& app, double& f0_hz, double& f0_hint_hz, int& max_harmonic,
                                           std::string_view estimated_on) {
  FundamentalOptions o;
  const std::string on = estimated_on.empty() ? "" : " on " + std::string(estimated_on);
  o.f0 = add_frequency_option(app, "--f0", f0_hz, "use exactly this fundamental in Hz, e.g. 1k (0 = estimate it" + on + ")");
  o.f0_hint = add_frequency_option(app, "--f0-hint", f0_hint_hz,
                                   "search for the fundamental within 20 % either side of this frequency in Hz (0 = anywhere)");
  o.harmonics = app.add_option("--harmonics", max_harmonic,
                               "highest harmonic to fit and report (0 = all below 0.45·fs, at most 50)")
                    ->capture_default_str()
                    ->type_name("N");
  return o;
}

void add_capture_options(CLI::App& app, io::ReadOptions& options) {
  add_frequency_option(app, "--rate", options.rate_hz,
                       "sample rate in Hz, e.g. 1MHz or 48k; overrides the file's (time column, preamble, "
                       "audio header); 0 = from the file");
  app.add_option_function<std::vector<std::string>>(
         "--scale",
         [&options](const std::vector<std::string>& items) {
           for (const auto& item : items) {
             auto [channel, text] = split_assignment(item, "--scale");
             double factor = 0;
             const char* end = text.data() + text.size();
             const auto [ptr, ec] = std::from_chars(text.data(), end, factor);
             if (ec != std::errc{} || ptr != end || !std::isfinite(factor) || factor == 0)
               throw CLI::ValidationError("--scale", "expected a finite non-zero factor after '=' in \"" +
                                                         item + "\"");
             options.scales.emplace_back(std::move(channel), factor);
           }
         },
         "multiply channel CH (a name, or #N for the data channel at 0-based position N) by FACTOR, e.g. volts per full scale or a "
         "probe's attenuation; repeatable")
      ->type_name("CH=FACTOR")
      ->take_all()
      ->allow_extra_args(false);
  app.add_option_function<std::vector<std::string>>(
         "--unit",
         [&options](const std::vector<std::string>& items) {
           for (const auto& item : items) options.units.push_back(split_assignment(item, "--unit"));
         },
         "set the unit of channel CH (a name, or #N for position N), e.g. v_out=V; repeatable")
      ->type_name("CH=UNIT")
      ->take_all()
      ->allow_extra_args(false);
  app.add_option("--time-column", options.time_column,
                 "CSV: the time column's name or 0-based position among all columns, or 'none'; "
                 "default: detected")
      ->type_name("NAME");
}

}  // namespace periodfit::cli

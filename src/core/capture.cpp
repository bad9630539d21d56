#include "core/capture.hpp"

#include <algorithm>
#include <cctype>
#include <charconv>
#include <optional>

#include "core/error.hpp"

namespace periodfit {

std::vector<std::string> Capture::channel_names() const {
  std::vector<std::string> names;
  names.reserve(channels.size());
  for (const auto& c : channels) names.push_back(c.name);
  return names;
}

namespace {

bool lower_equal(std::string_view a, std::string_view b) {
  return a.size() == b.size() && std::equal(a.begin(), a.end(), b.begin(), [](char x, char y) {
           return std::tolower(static_cast<unsigned char>(x)) == std::tolower(static_cast<unsigned char>(y));
         });
}

// Plain decimal digits as a number, or nullopt ("", "+1", "1.0", "1e3" are not positions).
std::optional<std::size_t> digits(std::string_view text) {
  std::size_t value = 0;
  const auto* end = text.data() + text.size();
  if (text.empty() || !std::all_of(text.begin(), text.end(), [](char c) { return c >= '0' && c <= '9'; }))
    return std::nullopt;
  if (auto [ptr, ec] = std::from_chars(text.data(), end, value); ec != std::errc{} || ptr != end)
    return std::nullopt;
  return value;
}

}  // namespace

std::optional<std::size_t> Capture::named_channel(std::string_view name) const {
  for (std::size_t i = 0; i < channels.size(); ++i)
    if (channels[i].name == name) return i;
  for (std::size_t i = 0; i < channels.size(); ++i)
    if (lower_equal(channels[i].name, name)) return i;
  return std::nullopt;
}

std::size_t Capture::channel_index(std::string_view selector) const {
  if (!selector.empty() && selector.front() == '#') {
    if (const auto index = digits(selector.substr(1)); index && *index < channels.size()) return *index;
    std::vector<std::string> positions;
    for (std::size_t i = 0; i < channels.size(); ++i) positions.push_back("#" + std::to_string(i) + " " + channels[i].name);
    throw UnknownNameError("channel", selector, positions, source);
  }
  if (const auto named = named_channel(selector)) return *named;
  if (const auto index = digits(selector); index && *index < channels.size()) return *index;
  throw UnknownNameError("channel", selector, channel_names(), source);
}

std::string Capture::channel_selector_warning(std::string_view selector) const {
  const auto index = digits(selector);
  const auto named = named_channel(selector);
  if (!index || !named || *index >= channels.size() || *index == *named) return "";
  return "channel \"" + std::string(selector) + "\" in " + source + " is the channel named " +
         std::string(selector) + " (#" + std::to_string(*named) + "); for the channel at position " +
         std::string(selector) + " (\"" + channels[*index].name + "\") write #" + std::string(selector);
}

}  // namespace periodfit

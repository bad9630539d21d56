#include "core/capture.hpp"

#include <algorithm>
#include <cctype>
#include <charconv>

#include "core/error.hpp"

namespace periodfit {

std::vector<std::string> Capture::channel_names() const {
  std::vector<std::string> names;
  names.reserve(channels.size());
  for (const auto& c : channels) names.push_back(c.name);
  return names;
}

std::size_t Capture::channel_index(std::string_view selector) const {
  for (std::size_t i = 0; i < channels.size(); ++i)
    if (channels[i].name == selector) return i;
  const auto lower_equal = [](std::string_view a, std::string_view b) {
    return a.size() == b.size() && std::equal(a.begin(), a.end(), b.begin(), [](char x, char y) {
             return std::tolower(static_cast<unsigned char>(x)) ==
                    std::tolower(static_cast<unsigned char>(y));
           });
  };
  for (std::size_t i = 0; i < channels.size(); ++i)
    if (lower_equal(channels[i].name, selector)) return i;
  std::size_t index = 0;
  const auto* end = selector.data() + selector.size();
  if (auto [ptr, ec] = std::from_chars(selector.data(), end, index);
      ec == std::errc{} && ptr == end && index < channels.size())
    return index;
  throw UnknownNameError("channel", selector, channel_names());
}

}  // namespace periodfit

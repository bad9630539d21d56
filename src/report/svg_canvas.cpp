#include "report/svg_canvas.hpp"

#include <algorithm>
#include <cctype>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <system_error>

namespace periodfit::report {

namespace {
// Average advance of a sans-serif glyph relative to the font size; used to size the legend and
// the margin for y tick labels (common practice for text-free layout).
constexpr double kGlyphWidth = 0.58;

std::size_t display_width(std::string_view s) {
  return static_cast<std::size_t>(std::count_if(
      s.begin(), s.end(), [](char c) { return (static_cast<unsigned char>(c) & 0xC0) != 0x80; }));
}
}  // namespace

std::string xml_escape(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  const auto* s = reinterpret_cast<const unsigned char*>(text.data());
  const std::size_t n = text.size();
  std::size_t i = 0;
  while (i < n) {
    const unsigned char c = s[i];
    if (c < 0x80) {
      switch (c) {
        case '&': out += "&amp;"; break;
        case '<': out += "&lt;"; break;
        case '>': out += "&gt;"; break;
        case '"': out += "&quot;"; break;
        case '\'': out += "&#39;"; break;
        case '\t':
        case '\n':
        case '\r': out += static_cast<char>(c); break;
        default:
          if (c < 0x20 || c == 0x7F)
            out += "\xEF\xBF\xBD";
          else
            out += static_cast<char>(c);
      }
      ++i;
      continue;
    }
    // A well-formed UTF-8 sequence (no overlongs, no surrogates, ≤ U+10FFFF) is copied whole.
    std::size_t len = 0;
    std::uint32_t cp = 0;
    if ((c & 0xE0) == 0xC0) { len = 2; cp = c & 0x1Fu; }
    else if ((c & 0xF0) == 0xE0) { len = 3; cp = c & 0x0Fu; }
    else if ((c & 0xF8) == 0xF0) { len = 4; cp = c & 0x07u; }
    bool ok = len > 0 && i + len <= n;
    for (std::size_t k = 1; ok && k < len; ++k) {
      if ((s[i + k] & 0xC0) != 0x80) ok = false;
      else cp = (cp << 6) | (s[i + k] & 0x3Fu);
    }
    if (ok) {
      const std::uint32_t min_cp = len == 2 ? 0x80 : len == 3 ? 0x800 : 0x10000;
      ok = cp >= min_cp && cp <= 0x10FFFF && !(cp >= 0xD800 && cp <= 0xDFFF) && cp != 0xFFFE &&
           cp != 0xFFFF && !(cp >= 0x80 && cp <= 0x9F);
    }
    if (ok) {
      out.append(text.substr(i, len));
      i += len;
    } else {
      out += "\xEF\xBF\xBD";
      ++i;
    }
  }
  return out;
}

namespace svg {

std::string fixed(double v, int decimals) {
  if (!std::isfinite(v)) v = 0;
  char buffer[48];
  const auto [end, ec] =
      std::to_chars(buffer, buffer + sizeof buffer, v, std::chars_format::fixed, decimals);
  std::string s(buffer, ec == std::errc{} ? end : buffer);
  if (s == "-0" || s == "-0.0" || s == "-0.00") s.erase(0, 1);
  return s;
}

std::string px(double v) { return fixed(std::clamp(v, -kPixelClamp, kPixelClamp), 1); }

double text_width(std::string_view s, double font_size) {
  return static_cast<double>(display_width(s)) * kGlyphWidth * font_size;
}

std::string sanitize_id(std::string_view id) {
  std::string out;
  for (char c : id)
    if (std::isalnum(static_cast<unsigned char>(c)) || c == '-' || c == '_') out += c;
  if (out.empty() || !std::isalpha(static_cast<unsigned char>(out[0]))) out.insert(0, "p");
  return out;
}

std::string marker(Marker marker, double x, double y, double size) {
  if (marker == Marker::square) return rect_open(x - size, y - size, 2 * size, 2 * size) + "/>";
  return "<circle cx=\"" + px(x) + "\" cy=\"" + px(y) + "\" r=\"" + fixed(size, 1) + "\"/>";
}

std::string rect_open(double x, double y, double width, double height) {
  return "<rect x=\"" + px(x) + "\" y=\"" + px(y) + "\" width=\"" + px(width) + "\" height=\"" + px(height) + "\"";
}

std::string clip_path(const std::string& id, double x, double y, double width, double height) {
  return "<clipPath id=\"" + id + "\">" + rect_open(x, y, width, height) + "/></clipPath>\n";
}

}  // namespace svg
}  // namespace periodfit::report

#include "core/safe_text.hpp"

#include <cmath>
#include <cstdlib>

namespace periodfit {

namespace {

void hex_escape(std::string& out, unsigned value) {
  static constexpr char kHex[] = "0123456789abcdef";
  const char escaped[4] = {'\\', 'x', kHex[(value >> 4) & 0xF], kHex[value & 0xF]};
  out.append(escaped, 4);
}

// A whole cell that strtod reads as a number (finite or inf/nan as written by the formatters).
bool is_number(std::string_view text) {
  if (text.empty() || text.size() > 64) return false;
  const std::string copy(text);
  char* end = nullptr;
  std::strtod(copy.c_str(), &end);
  return end == copy.c_str() + copy.size() && !std::isspace(static_cast<unsigned char>(copy[0]));
}

}  // namespace

std::string terminal_text(std::string_view text, bool multi_line) {
  std::string out;
  out.reserve(text.size());
  for (std::size_t i = 0; i < text.size(); ++i) {
    const auto c = static_cast<unsigned char>(text[i]);
    if (c == '\n' || c == '\t') {
      if (multi_line)
        out += static_cast<char>(c);
      else
        out.append({'\\', c == '\n' ? 'n' : 't'});
    } else if (c < 0x20 || c == 0x7F) {
      hex_escape(out, c);
    } else if (c == 0xC2 && i + 1 < text.size() && static_cast<unsigned char>(text[i + 1]) >= 0x80 &&
               static_cast<unsigned char>(text[i + 1]) <= 0x9F) {
      hex_escape(out, static_cast<unsigned char>(text[i + 1]));  // C1 control U+0080–U+009F
      ++i;
    } else {
      out += static_cast<char>(c);
    }
  }
  return out;
}

std::string csv_cell(std::string_view text) {
  const bool formula =
      !text.empty() && std::string_view("=+-@\t\r").find(text[0]) != std::string_view::npos && !is_number(text);
  std::string cell(formula ? 1 : 0, '\'');
  cell.append(text.data(), text.size());
  if (cell.find_first_of(",\"\r\n") == std::string::npos) return cell;
  std::string out = "\"";
  for (char c : cell) {
    if (c == '"') out += '"';
    out += c;
  }
  return out + "\"";
}

}  // namespace periodfit

#include "core/error.hpp"

#include <algorithm>
#include <cstring>
#include <numeric>

namespace periodfit {

namespace {
std::string located(const std::string& path, std::size_t line, std::size_t column,
                    const std::string& message) {
  std::string out = path;
  if (line > 0) {
    out += ':' + std::to_string(line);
    if (column > 0) out += ':' + std::to_string(column);
  }
  if (!out.empty()) out += ": ";
  return out + message;
}

std::size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> row(b.size() + 1);
  std::iota(row.begin(), row.end(), std::size_t{0});
  for (std::size_t i = 1; i <= a.size(); ++i) {
    std::size_t diagonal = row[0];
    row[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      const std::size_t up = row[j];
      const std::size_t cost = a[i - 1] == b[j - 1] ? 0 : 1;
      row[j] = std::min({row[j] + 1, row[j - 1] + 1, diagonal + cost});
      diagonal = up;
    }
  }
  return row[b.size()];
}
}  // namespace

std::string escape_nul(std::string_view message) {
  std::string out;
  out.reserve(message.size());
  for (char c : message) {
    if (c == '\0') out += "\\x00";
    else out += c;
  }
  return out;
}

InputError::InputError(std::string path, std::size_t line, std::size_t column,
                       std::string message)
    : Error(located(path, line, column, message)),
      path_(std::move(path)),
      line_(line),
      column_(column),
      message_(std::move(message)) {}

IoError::IoError(std::string path, std::string what_failed, int errno_value)
    : Error(path + ": " + what_failed + ": " + std::strerror(errno_value)), path_(std::move(path)) {}

OptionError::OptionError(std::string_view field, std::string_view value,
                         std::string_view constraint)
    : Error("invalid option: " + std::string(field) + " = " + std::string(value) + " (" +
            std::string(constraint) + ")") {}

std::string nearest_name(std::string_view name, const std::vector<std::string>& known) {
  std::string best;
  std::size_t best_distance = std::max<std::size_t>(2, name.size() / 3) + 1;
  for (const auto& candidate : known) {
    const std::size_t d = edit_distance(name, candidate);
    if (d < best_distance) {
      best_distance = d;
      best = candidate;
    }
  }
  return best;
}

UnknownNameError::UnknownNameError(std::string_view what, std::string_view name,
                                   const std::vector<std::string>& known, std::string_view where)
    : Error([&] {
        std::string msg = "unknown " + std::string(what) + " \"" + std::string(name) + "\"";
        if (!where.empty()) msg += " in " + std::string(where);
        std::string inside;
        if (const auto near = nearest_name(name, known); !near.empty())
          inside = "did you mean \"" + near + "\"? ";
        if (!known.empty()) {
          inside += std::string(what) + "s: ";
          for (std::size_t i = 0; i < known.size(); ++i) inside += (i ? ", " : "") + known[i];
        }
        if (!inside.empty()) msg += " (" + inside + ")";
        return msg;
      }()) {}

}  // namespace periodfit

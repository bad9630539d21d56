#include "core/table.hpp"

#include <algorithm>
#include <cassert>

#include "core/safe_text.hpp"

namespace periodfit {

namespace {
// Display width in code points, so UTF-8 units such as "°" or "Ω" do not break alignment.
std::size_t display_width(const std::string& s) {
  return static_cast<std::size_t>(std::count_if(
      s.begin(), s.end(), [](char c) { return (static_cast<unsigned char>(c) & 0xC0) != 0x80; }));
}
}  // namespace

void Table::add_row(std::vector<std::string> cells) {
  assert(cells.size() == columns_.size());
  // Cells carry input text (channel names, paths, messages): shown, never obeyed by the terminal.
  for (auto& cell : cells) cell = terminal_text(cell, false);
  rows_.push_back(std::move(cells));
}

std::string Table::render(int indent) const {
  std::vector<std::size_t> width(columns_.size());
  for (std::size_t c = 0; c < columns_.size(); ++c) {
    width[c] = display_width(columns_[c].title);
    for (const auto& row : rows_) width[c] = std::max(width[c], display_width(row[c]));
  }
  const std::string lead(static_cast<std::size_t>(std::max(indent, 0)), ' ');
  std::string out;
  const auto emit = [&](const std::vector<std::string>& cells) {
    std::string line = lead;
    for (std::size_t c = 0; c < cells.size(); ++c) {
      const std::string pad(width[c] - display_width(cells[c]), ' ');
      if (c) line += "  ";
      line += columns_[c].align == Align::right ? pad + cells[c] : cells[c] + pad;
    }
    while (!line.empty() && line.back() == ' ') line.pop_back();
    out += line + '\n';
  };
  std::vector<std::string> titles;
  for (const auto& col : columns_) titles.push_back(col.title);
  emit(titles);
  std::vector<std::string> rule;
  for (std::size_t c = 0; c < columns_.size(); ++c) rule.emplace_back(width[c], '-');
  emit(rule);
  for (const auto& row : rows_) emit(row);
  return out;
}

std::string render_key_values(const std::vector<std::pair<std::string, std::string>>& rows,
                              int indent) {
  std::size_t key_width = 0;
  for (const auto& [key, value] : rows) key_width = std::max(key_width, display_width(terminal_text(key, false)));
  const std::string lead(static_cast<std::size_t>(std::max(indent, 0)), ' ');
  std::string out;
  for (const auto& [raw_key, raw_value] : rows) {
    const std::string key = terminal_text(raw_key, false), value = terminal_text(raw_value, false);
    out += lead + key + std::string(key_width - display_width(key) + 2, ' ') + value + '\n';
  }
  return out;
}

}  // namespace periodfit

#pragma once
/// Aligned plain-text tables for people reading a terminal: a header row, a rule, and columns
/// padded so numbers line up (numbers right-aligned, text left-aligned).
#include <string>
#include <vector>

namespace periodfit {

class Table {
 public:
  enum class Align { left, right };
  struct Column {
    std::string title;
    Align align = Align::right;
  };

  explicit Table(std::vector<Column> columns) : columns_(std::move(columns)) {}
  /// Adds a row; it must have one cell per column.
  void add_row(std::vector<std::string> cells);
  /// The table as text, every line ending in '\n'; `indent` spaces before each line.
  std::string render(int indent = 0) const;

 private:
  std::vector<Column> columns_;
  std::vector<std::vector<std::string>> rows_;
};

/// "key  value" lines with the keys padded to one width, for per-file summaries.
std::string render_key_values(const std::vector<std::pair<std::string, std::string>>& rows,
                              int indent = 0);

}  // namespace periodfit

#include "store/identity.hpp"

#include <algorithm>
#include <filesystem>
#include <regex>

#include "core/error.hpp"
#include "io/output_file.hpp"

namespace periodfit::store {

const std::vector<std::string>& identity_fields() {
  static const std::vector<std::string> fields = {"serial", "lot", "fixture", "station", "operator"};
  return fields;
}

std::string Identity::get(const std::string& field) const {
  const auto it = values.find(field);
  return it == values.end() ? std::string() : it->second;
}

std::vector<std::pair<std::string, std::string>> Identity::rows() const {
  std::vector<std::pair<std::string, std::string>> out;
  for (const auto& f : identity_fields())
    if (const auto it = values.find(f); it != values.end()) out.emplace_back(f, it->second);
  return out;
}

namespace {

void check_field(const std::string& where, const std::string& field) {
  const auto& known = identity_fields();
  if (std::find(known.begin(), known.end(), field) == known.end())
    throw UnknownNameError("identity field in " + where, field, known);
}

std::string trim(std::string s) {
  const auto first = s.find_first_not_of(" \t\r");
  if (first == std::string::npos) return "";
  const auto last = s.find_last_not_of(" \t\r");
  return s.substr(first, last - first + 1);
}

}  // namespace

bool IdentitySettings::empty() const {
  return name_pattern.empty() && preamble_keys.empty() && !sidecar && config_values.empty() &&
         command_values.empty();
}

void IdentitySettings::validate() const {
  for (const auto& f : name_fields) check_field("name_fields", f);
  for (const auto& [f, key] : preamble_keys) check_field("preamble", f);
  for (const auto& [f, value] : config_values) check_field("[identity]", f);
  for (const auto& [f, value] : command_values) check_field("the command line", f);
  if (name_pattern.empty()) {
    if (!name_fields.empty()) throw OptionError("name_fields", "[…]", "needs name_pattern");
    return;
  }
  std::regex re;
  try {
    re = std::regex(name_pattern, std::regex::ECMAScript);
  } catch (const std::regex_error& e) {
    throw OptionError("name_pattern", name_pattern, std::string("is not a regular expression: ") + e.what());
  }
  if (re.mark_count() != name_fields.size())
    throw OptionError("name_pattern", name_pattern,
                      "has " + std::to_string(re.mark_count()) + " groups but name_fields names " +
                          std::to_string(name_fields.size()) + " fields");
}

Identity resolve_identity(const IdentitySettings& s, const std::string& path,
                          const std::vector<std::pair<std::string, std::string>>& metadata) {
  Identity id;
  for (const auto& [f, v] : s.config_values) id.values[f] = v;
  if (!s.name_pattern.empty()) {
    const std::regex re(s.name_pattern, std::regex::ECMAScript);
    const std::string name = std::filesystem::path(path).filename().string();
    std::smatch m;
    if (std::regex_search(name, m, re))
      for (std::size_t g = 0; g < s.name_fields.size() && g + 1 < m.size(); ++g)
        if (m[g + 1].matched) id.values[s.name_fields[g]] = m[g + 1].str();
  }
  for (const auto& [f, key] : s.preamble_keys)
    for (const auto& [k, v] : metadata)
      if (k == key) id.values[f] = v;
  if (s.sidecar) {
    const std::string sidecar = path + ".id";
    std::error_code ec;
    if (std::filesystem::exists(sidecar, ec)) {
      const std::string text = io::read_file(sidecar);
      std::size_t line_no = 0, start = 0;
      while (start < text.size()) {
        const std::size_t end = std::min(text.find('\n', start), text.size());
        const std::string line = trim(text.substr(start, end - start));
        start = end + 1;
        ++line_no;
        if (line.empty() || line[0] == '#') continue;
        const auto eq = line.find('=');
        if (eq == std::string::npos)
          throw InputError(sidecar, line_no, 1, "expected `field = value`");
        const std::string field = trim(line.substr(0, eq));
        const auto& known = identity_fields();
        if (std::find(known.begin(), known.end(), field) == known.end())
          throw InputError(sidecar, line_no, 1, UnknownNameError("identity field", field, known).what());
        id.values[field] = trim(line.substr(eq + 1));
      }
    }
  }
  for (const auto& [f, v] : s.command_values) id.values[f] = v;
  return id;
}

}  // namespace periodfit::store

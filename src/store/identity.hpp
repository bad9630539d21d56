#pragma once
/// Who and what a capture belongs to: serial number, lot, fixture, station and operator. They
/// come from the batch config's [identity] section (docs/batch-config.md), from the command
/// line, from the capture's file name (a regular expression whose groups fill fields), from
/// keys of the CSV preamble, or from a sidecar file `<capture>.id` beside the capture holding
/// `field = value` lines. Precedence for each field, highest first: command line, sidecar,
/// preamble, file name, config value. They are written into the per-file JSON ("identity"),
/// shown in the report's file section, and stored with the capture in the results database.
///
/// Usage:
///   IdentitySettings s; s.name_pattern = "board-([0-9]+)_lot-([A-Z0-9]+)"; s.name_fields = {"serial", "lot"};
///   const Identity id = resolve_identity(s, "caps/board-0412_lot-A7.csv", capture.metadata);
#include <map>
#include <string>
#include <utility>
#include <vector>

namespace periodfit::store {

/// The identity fields, in documentation order.
const std::vector<std::string>& identity_fields();

struct Identity {
  std::map<std::string, std::string> values;  ///< field → value; a field not known is absent
  std::string get(const std::string& field) const;
  /// "field → value" rows in identity_fields() order (for the report).
  std::vector<std::pair<std::string, std::string>> rows() const;
};

struct IdentitySettings {
  std::string name_pattern;               ///< ECMAScript regex searched in the file name; "" = none
  std::vector<std::string> name_fields;   ///< the field each capture group fills, in group order
  std::map<std::string, std::string> preamble_keys;  ///< field → CSV preamble key (exact match)
  bool sidecar = false;                   ///< read `<capture path>.id` when it exists
  std::map<std::string, std::string> config_values;  ///< field → value from the config
  std::map<std::string, std::string> command_values; ///< field → value from the command line

  /// Throws OptionError naming the field: an unknown field, a pattern that does not compile, a
  /// group count that does not match name_fields.
  void validate() const;
  bool empty() const;
};

/// The identity of the capture at `path` with preamble `metadata`. A sidecar that exists but
/// cannot be read or holds a malformed line throws InputError with its line.
Identity resolve_identity(const IdentitySettings& settings, const std::string& path,
                          const std::vector<std::pair<std::string, std::string>>& metadata);

}  // namespace periodfit::store

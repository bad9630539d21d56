#pragma once
/// The renderings of an identify result (ident/identify.hpp): the frf JSON document
/// (docs/frf-json.md), the report for people, and the roots of a fitted model as a table or a
/// phrase. The CLI (frf), batch and the HTML report all take their identify text from here.
#include <string>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "ident/identify.hpp"

namespace periodfit::output {

/// The identify JSON document (docs/frf-json.md), keys in the documented order.
nlohmann::ordered_json identify_json(const ident::IdentifyResult& result);

/// The report for people: a header, the FRF table, the model summary and the flags.
std::string format_identify_report(const ident::IdentifyResult& result);

/// Poles or zeros for people, frequency first in Hz, one row per real root or complex pair
/// (listed once), each value followed by its standard uncertainty `u=…` (GUM JCGM 100:2008
/// §7.2.2 "u = …" form; `u=undefined` at a repeated root):
///   complex pair: natural frequency f_n = |p|/2π, damping ratio ζ, Q;
///   real root:    corner frequency f_c = |p|/2π, time constant τ = −1/p (negative: right half-plane).
/// rad/s values are in the JSON (docs/frf-json.md), not here.
std::string format_roots_table(const std::vector<ident::Root>& roots);

/// One root (or pair) as one phrase in the same layout, e.g. `complex pair: natural frequency
/// 1200 Hz u=3.1 Hz, damping ratio 0.35 u=0.0021, Q 1.4286 u=0.0086`.
std::string root_summary(const ident::Root& root);

/// The batch report's rows for one file (channels, capture, fundamental, FRF, model, poles,
/// linearity), numbers as the terminal prints them.
std::vector<std::pair<std::string, std::string>> identify_summary_rows(const ident::IdentifyResult& result,
                                                                     const Capture& capture);

/// One warning sentence for people per flag that has one (the CLI prints them to stderr).
std::vector<std::string> identify_warnings(const ident::IdentifyResult& result);

}  // namespace periodfit::output

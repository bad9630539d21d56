#pragma once
/// One file of a batch: read the capture, run the configured analysis (analyze or identify),
/// and turn the result into what the batch needs — the flat MeasurementSet the limits are
/// evaluated on, the summary columns, the rows and figures of its report section, and the
/// analysis JSON. Errors propagate as exceptions (the runner makes them ERROR rows).
///
/// Uncertainties in the MeasurementSet are 95 % intervals. Identify: FRF points carry the
/// Student-t intervals the FRF stage computed; model parameters (1σ from the fit covariance,
/// which already allows for weights estimated from P periods: ident::covariance_inflation)
/// use the normal 1.96; f0 uses 1.96·u too (the sine fit has
/// thousands of residual degrees of freedom). Values at freq_hz come from the fitted model,
/// with u from the parameter covariance propagated to first order through ∂H/∂θ.
#include <nlohmann/json.hpp>
#include <string>
#include <utility>
#include <vector>

#include "batch/config.hpp"
#include "batch/limits.hpp"
#include "report/svg_plot.hpp"

namespace periodfit::batch {

/// One summary column.
struct KeyResult {
  std::string name;     ///< column name in summary.csv / summary.json ("f0_hz")
  std::string label;    ///< short label for people ("f0")
  std::string machine;  ///< shortest round-trip text ("" when not available)
  std::string person;   ///< 6 significant digits with unit ("" when not available)
};

struct FileAnalysis {
  MeasurementSet measurements;
  std::vector<KeyResult> keys;  ///< same names and order as analysis_key_names()
  std::vector<std::string> flags;
  std::vector<std::string> messages;  ///< warnings for people
  std::vector<std::pair<std::string, std::string>> result_rows;  ///< for the report section
  std::vector<std::pair<std::string, std::string>> metadata;     ///< from the capture
  std::vector<report::Figure> figures;
  nlohmann::ordered_json result_json;  ///< analyze/identify JSON of the file
};

/// Reads and analyses one capture per `config` (mode, read options, analysis settings), and
/// fills the measurements every limit of `config` may ask for.
FileAnalysis analyse_file(const std::string& path, const BatchConfig& config);

/// Names of the summary columns of `config.mode`, in order.
std::vector<std::string> analysis_key_names(const BatchConfig& config);

/// The analysis settings as "name → value" rows for the report header.
std::vector<std::pair<std::string, std::string>> analysis_settings_rows(const BatchConfig& config);

/// The "measurements" object of the per-file JSON: {key: {value, lo95, hi95}} in key order.
/// Linear in the number of measurements (channels × harmonics, freq_hz limits).
nlohmann::ordered_json measurements_json(const MeasurementSet& measurements);

/// The 95 % coverage factor used for model-derived quantities (see the header comment).
double model_coverage_factor();

}  // namespace periodfit::batch

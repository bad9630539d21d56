#pragma once
/// The model file: our own JSON document holding a fitted H(s) = B(s)/A(s)·e^{−sT} with its
/// parameter covariance, so `steady-state` (and people) can reuse a model without refitting. Schema
/// and versioning rules: docs/model-file.md. Format name "periodfit-model", version 1.
///
/// Usage:
///   ModelFile f = model_file_from_fit(fit, "bench_07.csv");
///   write_model_file("dut.model.json", f);
///   ModelFile g = read_model_file("dut.model.json");   // InputError names what is wrong
#include <complex>
#include <string>
#include <string_view>
#include <vector>

#include "ident/model.hpp"
#include "ident/rational_fit.hpp"
#include "predict/superposition.hpp"

namespace periodfit::output {

inline constexpr std::string_view kModelFileFormat = "periodfit-model";
inline constexpr int kModelFileVersion = 1;

struct ModelFile {
  ident::RationalModel model;                       ///< num, den (monic), delay, covariance, delay_estimated
  std::vector<std::string> parameter_names;  ///< covariance order ("b0"…, "a0"…, "T")
  std::vector<std::complex<double>> poles;   ///< rad/s (informative: recomputable from den)
  std::vector<std::complex<double>> zeros;   ///< rad/s
  std::string source;        ///< what the model was fitted to (file names), may be empty
  std::string created_by;    ///< "periodfit <version>"
  double f0_hz = 0;          ///< fundamental of the measurement (0 = unknown)
  bool has_fit = false;      ///< the fit summary below is meaningful
  double cost = 0;           ///< weighted LS cost at the optimum
  int dof = 0;
  bool adequate = false;
  std::string method;
  std::vector<ident::FrfPoint> frf; ///< the measured FRF points, optional (empty = not stored)
};

/// The file content for a fit result (model, covariance, names, roots, fit summary). `source`
/// names the input; `frf` (optional) stores the measured points too.
ModelFile model_file_from_fit(const ident::RationalFitResult& fit, std::string source, double f0_hz = 0,
                              std::vector<ident::FrfPoint> frf = {});

/// JSON text (keys in the documented order, doubles shortest round-trip), ending in a newline.
std::string format_model_file(const ModelFile& file);

/// Writes format_model_file atomically (path "-" = stdout).
void write_model_file(const std::string& path, const ModelFile& file);

/// Parses a model file; `name` is used in messages. Throws InputError (`name: message`) naming
/// the key that is missing, of the wrong type, or inconsistent (den not monic, covariance of the
/// wrong size or not symmetric, unknown format or a newer version).
ModelFile parse_model_file(std::string_view text, std::string_view name);

/// The system a model file describes for a steady-state prediction: its model (when it holds
/// one) and its measured points; `prefer_measured` takes the measured points where they exist.
/// Throws InputError naming `path` when prefer_measured is asked of a file without measured
/// points, the asking option written as `measured_option` (the CLI's --response-from, the
/// Python module's response_from).
predict::PredictSystem prediction_system(const ModelFile& file, bool prefer_measured, const std::string& path,
                                         std::string_view measured_option);

/// read_file + parse_model_file (IoError for OS failures).
ModelFile read_model_file(const std::string& path);

}  // namespace periodfit::output

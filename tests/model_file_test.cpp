// The model file (docs/model-file.md): round trip of a fitted model, and whole-message errors
// for malformed files.
#include <doctest/doctest.h>

#include <cmath>
#include <filesystem>
#include <numbers>
#include <string>

#include "core/error.hpp"
#include "output/model_file.hpp"
#include "ident/rational_fit.hpp"
#include "io/output_file.hpp"

using namespace periodfit;
using namespace periodfit::ident;
using namespace periodfit::output;

namespace {

// freq_hz is stored, ω = 2π·f is recomputed on reading: a couple of ulps.
constexpr double kOmegaRoundTripRel = 4e-16;

ModelFile fitted_file() {
  // Second-order low-pass ω_n = 2π·500 Hz, ζ = 0.4 with a dead time; exact data, nominal noise.
  const double wn = 2 * std::numbers::pi * 500, zeta = 0.4, delay = 1e-4;
  RationalModel truth;
  truth.num = {wn * wn};
  truth.den = {wn * wn, 2 * zeta * wn, 1};
  truth.delay_s = delay;
  std::vector<FrfPoint> pts;
  for (int n = 1; n <= 12; ++n) {
    const double w = 2 * std::numbers::pi * 100 * n;
    pts.push_back(FrfPoint::circular(w, truth.response(w), 1e-8));
  }
  RationalFitOptions o;
  o.order = {0, 2};
  o.estimate_delay = true;
  return model_file_from_fit(fit_rational(pts, o), "bench_07.csv", 100, pts);
}

const char* kMinimal = R"({"format": "periodfit-model", "version": 1,
  "model": {"num": [2], "den": [3, 1]}})";

std::string parse_error(const std::string& text) {
  try {
    parse_model_file(text, "dut.json");
  } catch (const InputError& e) {
    return e.what();
  }
  return "(no error)";
}

}  // namespace

TEST_CASE("model file: a fitted model round-trips exactly through the JSON text") {
  const ModelFile f = fitted_file();
  const std::string text = format_model_file(f);
  const ModelFile g = parse_model_file(text, "dut.json");
  CHECK(g.model.num == f.model.num);  // shortest round-trip doubles: exact
  CHECK(g.model.den == f.model.den);
  CHECK(g.model.den.back() == 1);
  CHECK(g.model.delay_s == f.model.delay_s);
  CHECK(g.model.delay_estimated);
  CHECK(g.model.covariance == f.model.covariance);
  CHECK(g.model.covariance.size() == 4);
  CHECK(g.parameter_names == std::vector<std::string>{"b0", "a0", "a1", "T"});
  CHECK(g.poles == f.poles);
  CHECK(g.zeros.empty());
  CHECK(g.source == "bench_07.csv");
  CHECK(g.created_by == f.created_by);
  CHECK(g.f0_hz == 100);
  CHECK(g.has_fit);
  CHECK(g.cost == f.cost);
  CHECK(g.dof == f.dof);
  CHECK(g.adequate == f.adequate);
  CHECK(g.method == f.method);
  REQUIRE(g.frf.size() == f.frf.size());
  for (std::size_t k = 0; k < f.frf.size(); ++k) {
    CHECK(g.frf[k].omega_rad_s == doctest::Approx(f.frf[k].omega_rad_s).epsilon(kOmegaRoundTripRel));
    CHECK(g.frf[k].h == f.frf[k].h);
    CHECK(g.frf[k].var_re == f.frf[k].var_re);
  }
  CHECK(format_model_file(g) == text);  // and the text is stable
  // The documented key order (docs/model-file.md).
  CHECK(text.find("\"format\"") < text.find("\"version\""));
  CHECK(text.find("\"version\"") < text.find("\"model\""));
  CHECK(text.find("\"model\"") < text.find("\"fit\""));
  CHECK(text.find("\"fit\"") < text.find("\"frf\""));
}

TEST_CASE("model file: written atomically and read back from disk") {
  const auto dir = std::filesystem::temp_directory_path() / "periodfit_model_file_test";
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  const std::string path = (dir / "dut.model.json").string();
  const ModelFile f = fitted_file();
  write_model_file(path, f);
  CHECK(read_model_file(path).model.num == f.model.num);
  CHECK_THROWS_AS(read_model_file((dir / "missing.json").string()), IoError);
  std::filesystem::remove_all(dir);
}

TEST_CASE("model file: a minimal hand-written file reads with defaults") {
  const ModelFile f = parse_model_file(kMinimal, "typed.json");
  CHECK(f.model.num == std::vector<double>{2});
  CHECK(f.model.den == std::vector<double>{3, 1});
  CHECK(f.model.delay_s == 0);
  CHECK(f.model.covariance.empty());
  CHECK(!f.has_fit);
  CHECK(f.frf.empty());
}

TEST_CASE("model file: malformed files name what is wrong") {
  CHECK(parse_error("{\"format\": ") ==
        "dut.json:1:12: not valid JSON: syntax error while parsing value - unexpected end of input; expected '[', "
        "'{', or a literal");
  // Found by fuzz_model_file (tests/regressions/model_file/): a literal beyond double's range
  // threw nlohmann's out_of_range, which was not caught and aborted the program.
  CHECK(parse_error("{\"format\": \"periodfit-model\",\n \"version\": 1e999}") ==
        "dut.json:2:13: not valid JSON: number overflow parsing '1e999' (a number must fit a double)");
  CHECK(parse_error("[1, 2]") == "dut.json: expected a JSON object at the top level, found an array");
  CHECK(parse_error("{}") == "dut.json: missing key \"format\"");
  CHECK(parse_error(R"({"format": "other", "version": 1})") ==
        "dut.json: \"format\" is \"other\", expected \"periodfit-model\"");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 2, "model": {}})") ==
        "dut.json: version 2 is newer than this program reads (up to 1)");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": "1"})") ==
        "dut.json: \"version\" must be an integer, found a string");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1})") == "dut.json: missing key \"model\"");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1, "model": {"den": [1, 1]}})") ==
        "dut.json: missing key \"model.num\"");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1, "model": {"num": [1, "x"], "den": [1, 1]}})") ==
        "dut.json: \"model.num[1]\" must be a number, found a string");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1, "model": {"num": [], "den": [1, 1]}})") ==
        "dut.json: \"model.num\" must be a non-empty array of numbers, found an array");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1, "model": {"num": [1], "den": [1, 2]}})") ==
        "dut.json: \"model.den\" must be monic (last coefficient 1), found 2");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1, "model": {"num": [1], "den": [1]}})") ==
        "dut.json: \"model.den\" must have at least 2 coefficients (a0, a1), found 1");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1,
                        "model": {"num": [1], "den": [1, 1], "delay_s": -1}})") ==
        "dut.json: \"model.delay_s\" must be >= 0, found -1");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1,
                        "model": {"num": [1], "den": [1, 1], "covariance": [[1, 0], [0, 1], [0, 0]]}})") ==
        "dut.json: \"model.covariance\" has 3 rows, expected 2 (one per free parameter)");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1,
                        "model": {"num": [1], "den": [1, 1], "covariance": [[1, 0.5], [0, 1]]}})") ==
        "dut.json: \"model.covariance\" is not symmetric at [1][0]");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1,
                        "model": {"num": [1], "den": [1, 1], "covariance": [[1, 0], [0, -1]]}})") ==
        "dut.json: \"model.covariance\" has a negative variance at [1][1]");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1,
                        "model": {"num": [1], "den": [1, 1], "parameters": ["b0"]}})") ==
        "dut.json: \"model.parameters\" has 1 names, expected 2 (num, then den without its monic 1)");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1,
                        "model": {"num": [1], "den": [1, 1], "poles": [{"re": -1}]}})") ==
        "dut.json: missing key \"model.poles[0].im\"");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1, "model": {"num": [1], "den": [1, 1]},
                        "frf": [{"freq_hz": 0, "re": 1, "im": 0, "var_re": 1, "var_im": 1, "cov_re_im": 0}]})") ==
        "dut.json: \"frf[0].freq_hz\" must be > 0, found 0");
  CHECK(parse_error(R"({"format": "periodfit-model", "version": 1, "model": {"num": [1], "den": [1, 1]},
                        "fit": {"cost": 1, "dof": 2.5, "adequate": true}})") ==
        "dut.json: \"fit.dof\" must be an integer, found a number");
}

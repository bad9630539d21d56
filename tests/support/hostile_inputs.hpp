#pragma once
// Shared by the robustness and numerical-honesty tests: writers for the capture files of the
// hostile-input catalogue (docs/robustness.md), the verdicts "clear error" / "crashed", and
// running periodfit as an unprivileged user when the tests run as root.
#include "support/test_paths.hpp"
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "support/cli_runner.hpp"
#include "support/signals.hpp"

namespace periodfit::test {

/// One periodic test signal: dc + Σ amp_n·cos(2π·n·f0·t + phase_n) + white Gaussian noise.
struct Signal {
  double dc = 0;
  double f0_hz = 50;
  std::vector<double> amplitudes = {1.0};  ///< [n-1]: amplitude of harmonic n
  std::vector<double> phases_deg;          ///< [n-1]: phase of harmonic n (missing = 0)
  double noise_rms = 0;
  unsigned seed = 1;
};

/// The signal's n_samples at fs_hz from t0_s (support/signals.hpp).
inline std::vector<double> synthesize(const Signal& s, double fs_hz, std::size_t n_samples, double t0_s = 0) {
  std::vector<Tone> tones;
  for (std::size_t h = 0; h < s.amplitudes.size(); ++h)
    tones.push_back({static_cast<int>(h + 1), s.amplitudes[h], h < s.phases_deg.size() ? s.phases_deg[h] : 0.0});
  std::mt19937_64 rng(s.seed);
  return tone_samples(s.dc, tones, s.f0_hz, {fs_hz, n_samples, t0_s},
                      s.noise_rms > 0 ? WhiteNoise{s.noise_rms, &rng} : WhiteNoise{});
}

/// CSV text `t (s),name (V)…` with a time column t_k = k/fs and one column per channel, every
/// value printed with 17 significant digits (exact round trip).
inline std::string capture_csv(double fs_hz, const std::vector<std::vector<double>>& channels,
                               const std::vector<std::string>& names = {}) {
  std::string text = "t (s)";
  for (std::size_t c = 0; c < channels.size(); ++c)
    text += "," + (c < names.size() ? names[c] : "ch" + std::to_string(c)) + " (V)";
  text += "\n";
  const std::size_t n = channels.empty() ? 0 : channels.front().size();
  char buf[64];
  for (std::size_t k = 0; k < n; ++k) {
    std::snprintf(buf, sizeof buf, "%.17g", static_cast<double>(k) / fs_hz);
    text += buf;
    for (const auto& ch : channels) {
      std::snprintf(buf, sizeof buf, ",%.17g", ch[k]);
      text += buf;
    }
    text += "\n";
  }
  return text;
}

/// A WAV file (RIFF, WAVE_FORMAT_IEEE_FLOAT, 32-bit) written byte by byte, so that NaN and Inf
/// samples are stored exactly as given (no library in between that could clip them).
inline std::string float_wav_bytes(double fs_hz, const std::vector<float>& samples, unsigned channels = 1) {
  auto u32 = [](std::string& s, std::uint32_t v) { for (int i = 0; i < 4; ++i) s += static_cast<char>((v >> (8 * i)) & 0xffu); };
  auto u16 = [](std::string& s, std::uint16_t v) { s += static_cast<char>(v & 0xffu); s += static_cast<char>(v >> 8); };
  const auto rate = static_cast<std::uint32_t>(fs_hz);
  const auto data_bytes = static_cast<std::uint32_t>(samples.size() * 4);
  std::string fmt;
  u16(fmt, 3);  // WAVE_FORMAT_IEEE_FLOAT
  u16(fmt, static_cast<std::uint16_t>(channels));
  u32(fmt, rate);
  u32(fmt, rate * 4 * channels);
  u16(fmt, static_cast<std::uint16_t>(4 * channels));
  u16(fmt, 32);
  std::string body = "WAVEfmt ";
  u32(body, static_cast<std::uint32_t>(fmt.size()));
  body += fmt;
  body += "data";
  u32(body, data_bytes);
  for (float v : samples) {
    std::uint32_t bits = 0;
    std::memcpy(&bits, &v, 4);
    u32(body, bits);
  }
  std::string out = "RIFF";
  u32(out, static_cast<std::uint32_t>(body.size()));
  return out + body;
}

/// A 16-bit PCM mono WAV, samples in full-scale units (±1), rounded to the nearest code.
inline std::string pcm16_wav_bytes(double fs_hz, const std::vector<double>& samples) {
  auto u32 = [](std::string& s, std::uint32_t v) { for (int i = 0; i < 4; ++i) s += static_cast<char>((v >> (8 * i)) & 0xffu); };
  auto u16 = [](std::string& s, std::uint16_t v) { s += static_cast<char>(v & 0xffu); s += static_cast<char>(v >> 8); };
  const auto rate = static_cast<std::uint32_t>(fs_hz);
  std::string out = "RIFF";
  u32(out, static_cast<std::uint32_t>(36 + samples.size() * 2));
  out += "WAVEfmt ";
  u32(out, 16);
  u16(out, 1);  // PCM
  u16(out, 1);
  u32(out, rate);
  u32(out, rate * 2);
  u16(out, 2);
  u16(out, 16);
  out += "data";
  u32(out, static_cast<std::uint32_t>(samples.size() * 2));
  out.reserve(out.size() + samples.size() * 2);
  for (double v : samples) {
    const long code = std::lround(std::clamp(v, -1.0, 32767.0 / 32768.0) * 32768.0);
    u16(out, static_cast<std::uint16_t>(static_cast<std::int16_t>(code)));
  }
  return out;
}

/// The CLI's answer to bad input (DEVELOPERS.md, "Errors"): exit 2, exactly one line on stderr
/// starting `periodfit: error: `, not an internal error (an escaped exception), nothing on stdout.
inline bool is_clear_error(const CliRun& r) {
  const std::string prefix = "periodfit: error: ";
  return r.exit_code == 2 && r.err.rfind(prefix, 0) == 0 && r.err.find('\n') == r.err.size() - 1 &&
         r.err.find("internal error") == std::string::npos && r.out.empty();
}

/// A human-readable account of a run, for failure messages.
inline std::string describe(const CliRun& r) {
  return "exit " + std::to_string(r.exit_code) + ", stderr: " + r.err.substr(0, 600) +
         (r.out.empty() ? "" : ", stdout: " + r.out.substr(0, 300));
}

/// True when `periodfit <command> --help` lists `option`: the command has landed (the
/// placeholder of a command not built yet declares no options).
inline bool command_has_option(const std::string& command, const std::string& option) {
  const CliRun r = run_cli(command + " --help");
  return r.exit_code == 0 && r.out.find(option) != std::string::npos;
}

/// Runs a whole shell command line (PERIODFIT_EXE is available as "$PF"), capturing like run_cli.
inline CliRun run_shell(const std::string& script) {
  TempDir dir("sh");
  const std::string out = dir.file("out"), err = dir.file("err");
  const std::string cmd = "PF='" + std::string(PERIODFIT_EXE) + "'; export PF; { " + script + " ; } >'" + out +
                          "' 2>'" + err + "' </dev/null";
  const int status = std::system(cmd.c_str());
  CliRun r;
  r.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  r.out = slurp(out);
  r.err = slurp(err);
  return r;
}

/// Root ignores file permissions (CAP_DAC_OVERRIDE), so a permission test as root runs the
/// binary as `nobody` through util-linux setpriv. Returns "" when not root (run directly), the
/// prefix when that works, and nullopt-like "unavailable" when it cannot be done here.
inline std::string unprivileged_prefix() {
  if (::geteuid() != 0) return "";
  const std::string prefix = "setpriv --reuid=65534 --regid=65534 --clear-groups ";
  const CliRun probe = run_shell(prefix + "\"$PF\" --version");
  return probe.exit_code == 0 ? prefix : "unavailable";
}

}  // namespace periodfit::test

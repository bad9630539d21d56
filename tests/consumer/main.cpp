// Reads a capture, analyses its first channel and measures the DUT's frequency response through
// the installed C++ API, printing one line per figure; exits 1 on a wrong number, 2 on an error
// (the install_consumer test compares the lines with the CLI's JSON for the same file).
#include <cmath>
#include <cstdio>
#include <exception>

#include <periodfit/periodfit.hpp>

int main(int argc, char** argv) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: consumer CAPTURE.csv\n");
    return 2;
  }
  try {
    const periodfit::Capture capture = periodfit::io::read_capture(argv[1]);
    const periodfit::dsp::ChannelAnalysis a =
        periodfit::dsp::analyze_channel(capture.channels.at(0), capture.sample_rate_hz, capture.t0_s);
    std::printf("version %s\n", periodfit::version());
    std::printf("f0_hz %.17g\nf0_u_hz %.17g\n", a.fundamental.f0_hz, a.fundamental.f0_u_hz);
    std::printf("amplitude_1 %.17g\n", a.harmonics.at(0).amplitude);
    // The test's DUT is a wire (output = input): |H| = 1 at every excited line, no model to fit.
    const periodfit::ident::IdentifyResult r = periodfit::ident::identify(capture);
    std::printf("frf_points %zu\nmag_1 %.6f\n", r.frf.points.size(), r.frf.points.at(0).mag);
    return std::isfinite(a.fundamental.f0_hz) ? 0 : 1;
  } catch (const periodfit::Error& e) {
    std::fprintf(stderr, "consumer: error: %s\n", e.what());
    return 2;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "consumer: unexpected: %s\n", e.what());
    return 2;
  }
}

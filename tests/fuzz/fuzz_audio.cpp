// libFuzzer target: the audio path (io::parse_audio: our container walk, then libsndfile's
// decoders through its virtual I/O over the fuzz buffer) on arbitrary bytes.
#include <cstddef>
#include <cstdint>

#include "core/error.hpp"
#include "fuzz_check.hpp"
#include "io/audio_reader.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  try {
    const auto capture = periodfit::io::parse_audio(periodfit::fuzz::as_text(data, size), "fuzz.wav");
    periodfit::fuzz::check_capture(capture);
  } catch (const periodfit::Error&) {
  }
  return 0;
}

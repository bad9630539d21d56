#pragma once
/// Writing WAV files through libsndfile (16/24-bit PCM or 32-bit float), atomically.
///
/// Scale: sample value 1.0 is full scale. A PCM value v is stored as the integer code
/// round(v·2^(b−1)) — the scale libsndfile's sf_read_double uses when reading (1/0x8000 for
/// 16 bits), so a file reads back to exactly the values written when each value is a multiple of
/// 2^−(b−1). The largest positive code is 2^(b−1) − 1: a value that would need more, or any
/// value of magnitude above 1, is refused (OptionError), never clipped. Callers quantise with
/// `quantize_pcm` first. Float files store the values as IEEE single precision.
///
///   const auto v = io::quantize_pcm(x, io::AudioEncoding::pcm16, 0.5);  // |v| ≤ 0.5
///   io::write_wav("sweep.wav", v, 48000, {.encoding = io::AudioEncoding::pcm16});
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace periodfit::io {

enum class AudioEncoding { pcm16, pcm24, float32 };

/// "pcm16", "pcm24", "float".
std::string_view audio_encoding_name(AudioEncoding encoding);
/// 2^(b−1) for PCM (32768, 8388608); 0 for float.
long pcm_full_scale(AudioEncoding encoding);

/// Rounds each value to the nearest PCM code, then limits the codes to ±floor(peak·2^(b−1))
/// (and to 2^(b−1) − 1), so the written peak never exceeds `peak` (≤ 1). Float: rounds to
/// single precision, moving a value that rounds above `peak` one step towards zero.
std::vector<double> quantize_pcm(std::span<const double> values, AudioEncoding encoding, double peak);

struct WavWriteOptions {
  AudioEncoding encoding = AudioEncoding::pcm24;  ///< sample format
  int channels = 1;  ///< the mono signal is written to every channel (identical copies), >= 1
};

/// The WAV file's bytes for `mono` at `rate_hz` (a positive integer), every channel a copy;
/// `path` names the destination in messages. Throws as write_wav, but writes nothing: a command
/// renders every output first and publishes them together (io/output_set.hpp).
std::string wav_bytes(std::span<const double> mono, double rate_hz, const WavWriteOptions& options,
                      const std::string& path);

/// Writes `mono` at `rate_hz` (a positive integer) to `path` ("-" = stdout) atomically. Throws
/// OptionError for a bad rate, channel count or out-of-range value, IoError for OS failures.
void write_wav(const std::string& path, std::span<const double> mono, double rate_hz,
               const WavWriteOptions& options = {});

}  // namespace periodfit::io

#include "io/audio_writer.hpp"

#include <sndfile.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <memory>

#include "core/error.hpp"
#include "core/number_format.hpp"
#include "io/output_file.hpp"

namespace periodfit::io {

namespace {

int bits(AudioEncoding e) { return e == AudioEncoding::pcm16 ? 16 : e == AudioEncoding::pcm24 ? 24 : 32; }

/// libsndfile writes into this buffer (virtual I/O); the bytes then go out through
/// write_file_atomic, so a failed write never leaves a half file.
struct MemoryFile {
  std::string bytes;
  sf_count_t position = 0;
};

sf_count_t mem_length(void* user) { return static_cast<sf_count_t>(static_cast<MemoryFile*>(user)->bytes.size()); }

sf_count_t mem_seek(sf_count_t offset, int whence, void* user) {
  auto* f = static_cast<MemoryFile*>(user);
  sf_count_t base = 0;
  if (whence == SEEK_CUR) base = f->position;
  if (whence == SEEK_END) base = static_cast<sf_count_t>(f->bytes.size());
  const sf_count_t target = base + offset;
  if (target < 0) return -1;
  f->position = target;
  return target;
}

sf_count_t mem_read(void* ptr, sf_count_t count, void* user) {
  auto* f = static_cast<MemoryFile*>(user);
  const auto size = static_cast<sf_count_t>(f->bytes.size());
  const sf_count_t n = std::max<sf_count_t>(0, std::min(count, size - f->position));
  if (n > 0) std::memcpy(ptr, f->bytes.data() + f->position, static_cast<std::size_t>(n));
  f->position += n;
  return n;
}

sf_count_t mem_write(const void* ptr, sf_count_t count, void* user) {
  auto* f = static_cast<MemoryFile*>(user);
  const auto end = static_cast<std::size_t>(f->position + count);
  if (end > f->bytes.size()) f->bytes.resize(end, '\0');
  std::memcpy(f->bytes.data() + f->position, ptr, static_cast<std::size_t>(count));
  f->position += count;
  return count;
}

sf_count_t mem_tell(void* user) { return static_cast<MemoryFile*>(user)->position; }

}  // namespace

std::string_view audio_encoding_name(AudioEncoding encoding) {
  switch (encoding) {
    case AudioEncoding::pcm16: return "pcm16";
    case AudioEncoding::pcm24: return "pcm24";
    case AudioEncoding::float32: return "float";
  }
  return "?";
}

long pcm_full_scale(AudioEncoding encoding) {
  return encoding == AudioEncoding::float32 ? 0 : 1L << (bits(encoding) - 1);
}

std::vector<double> quantize_pcm(std::span<const double> values, AudioEncoding encoding, double peak) {
  std::vector<double> out(values.begin(), values.end());
  if (encoding == AudioEncoding::float32) {
    for (double& v : out) {
      auto f = static_cast<float>(v);
      if (std::abs(static_cast<double>(f)) > peak) f = std::nextafter(f, 0.0f);
      v = static_cast<double>(f);
    }
    return out;
  }
  const long fs = pcm_full_scale(encoding);
  const auto scale = static_cast<double>(fs);
  const long limit = std::min(fs - 1, static_cast<long>(std::floor(peak * scale)));
  for (double& v : out) {
    const long code = std::clamp(std::lround(v * scale), -limit, limit);
    v = static_cast<double>(code) / scale;
  }
  return out;
}

std::string wav_bytes(std::span<const double> mono, double rate_hz, const WavWriteOptions& options,
                      const std::string& path) {
  if (!(rate_hz >= 1 && rate_hz <= 1e9 && rate_hz == std::floor(rate_hz)))
    throw OptionError("rate_hz", format_shortest(rate_hz), "a WAV file needs a whole number of samples per second");
  if (options.channels < 1 || options.channels > 64)
    throw OptionError("channels", std::to_string(options.channels), "must be in [1, 64]");
  const long fs = pcm_full_scale(options.encoding);
  const auto channels = static_cast<std::size_t>(options.channels);
  SF_INFO info{};
  info.samplerate = static_cast<int>(rate_hz);
  info.channels = options.channels;
  info.format = SF_FORMAT_WAV | (options.encoding == AudioEncoding::pcm16   ? SF_FORMAT_PCM_16
                                 : options.encoding == AudioEncoding::pcm24 ? SF_FORMAT_PCM_24
                                                                            : SF_FORMAT_FLOAT);
  MemoryFile memory;
  SF_VIRTUAL_IO vio{mem_length, mem_seek, mem_read, mem_write, mem_tell};
  std::unique_ptr<SNDFILE, int (*)(SNDFILE*)> file(sf_open_virtual(&vio, SFM_WRITE, &info, &memory), sf_close);
  if (!file) throw Error(path + ": cannot encode WAV: " + sf_strerror(nullptr));
  // Write in blocks, every channel a copy of the mono signal.
  constexpr std::size_t kBlockFrames = 8192;
  std::vector<int> codes;
  std::vector<float> floats;
  for (std::size_t start = 0; start < mono.size(); start += kBlockFrames) {
    const std::size_t frames = std::min(kBlockFrames, mono.size() - start);
    if (fs > 0) {
      codes.resize(frames * channels);
      const int shift = 32 - bits(options.encoding);  // libsndfile's int API is left-justified
      for (std::size_t k = 0; k < frames; ++k) {
        const double v = mono[start + k];
        const double scaled = v * static_cast<double>(fs);
        const long code = std::lround(scaled);
        if (!std::isfinite(v) || code >= fs || code < -(fs - 1) || static_cast<double>(code) != scaled)
          throw OptionError("sample " + std::to_string(start + k), format_shortest(v),
                            "must be a multiple of 2^-" + std::to_string(bits(options.encoding) - 1) +
                                " below full scale (quantise first)");
        const int left = static_cast<int>(code * (1L << shift));
        for (std::size_t c = 0; c < channels; ++c) codes[k * channels + c] = left;
      }
      if (sf_writef_int(file.get(), codes.data(), static_cast<sf_count_t>(frames)) != static_cast<sf_count_t>(frames))
        throw Error(path + ": cannot encode WAV: " + sf_strerror(file.get()));
    } else {
      floats.resize(frames * channels);
      for (std::size_t k = 0; k < frames; ++k) {
        const double v = mono[start + k];
        if (!std::isfinite(v)) throw OptionError("sample " + std::to_string(start + k), format_shortest(v), "must be finite");
        for (std::size_t c = 0; c < channels; ++c) floats[k * channels + c] = static_cast<float>(v);
      }
      if (sf_writef_float(file.get(), floats.data(), static_cast<sf_count_t>(frames)) != static_cast<sf_count_t>(frames))
        throw Error(path + ": cannot encode WAV: " + sf_strerror(file.get()));
    }
  }
  file.reset();  // sf_close finalises the header sizes
  return std::move(memory.bytes);
}

void write_wav(const std::string& path, std::span<const double> mono, double rate_hz,
               const WavWriteOptions& options) {
  write_file_atomic(path, wav_bytes(mono, rate_hz, options, path));
}

}  // namespace periodfit::io

#include "io/audio_reader.hpp"

#include <fcntl.h>
#include <sndfile.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <cerrno>
#include <cstdint>
#include <cstring>
#include <cstdio>
#include <functional>
#include <limits>
#include <memory>
#include <optional>

#include "core/error.hpp"
#include "io/file_handle.hpp"

namespace periodfit::io {

namespace {

// Frames decoded per libsndfile call; the interleaved buffer is this × channels doubles.
constexpr sf_count_t kBlockFrames = 16384;

std::string lower_extension(std::string_view path) {
  const std::size_t slash = path.find_last_of('/');
  const std::size_t dot = path.find_last_of('.');
  if (dot == std::string_view::npos || (slash != std::string_view::npos && dot < slash)) return "";
  std::string ext(path.substr(dot + 1));
  for (auto& c : ext) c = static_cast<char>(c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c);
  return ext;
}

// ---- container walk: is the file as long as its header says? ----------------------------

/// Reads exactly n bytes at offset; false past the end.
using ReadAt = std::function<bool(std::uint64_t offset, void* out, std::size_t n)>;

std::uint64_t le(const unsigned char* p, int n) {
  std::uint64_t v = 0;
  for (int i = n - 1; i >= 0; --i) v = (v << 8) | p[i];
  return v;
}
std::uint64_t be(const unsigned char* p, int n) {
  std::uint64_t v = 0;
  for (int i = 0; i < n; ++i) v = (v << 8) | p[i];
  return v;
}

std::string cut_in_header(std::uint64_t size) {
  return "truncated audio file: cut in the header (the file ends at byte " + std::to_string(size) +
         ", before the sample data)";
}
std::string cut_in_data(std::uint64_t declared, std::uint64_t held) {
  return "truncated audio file: cut in the data (the header declares " + std::to_string(declared) +
         " bytes of samples, the file holds " + std::to_string(held) + ")";
}

constexpr unsigned char kW64Riff[16] = {'r', 'i', 'f', 'f', 0x2E, 0x91, 0xCF, 0x11,
                                        0xA5, 0xD6, 0x28, 0xDB, 0x04, 0xC1, 0x00, 0x00};
constexpr unsigned char kW64Data[16] = {'d', 'a', 't', 'a', 0xF3, 0xAC, 0xD3, 0x11,
                                        0x8C, 0xD1, 0x00, 0xC0, 0x4F, 0x8E, 0xDB, 0x8A};

// RIFF/RIFX/RF64/BW64 (WAV), FORM (AIFF/AIFC) and W64: walks the chunks up to the sample
// data and compares the declared data size with what the file holds. nullopt = consistent or
// a container this walk does not know (libsndfile then judges it alone).
/// The IEEE 754 80-bit extended value AIFF stores its sample rate in (AIFF 1.3, COMM chunk):
/// sign and 15-bit exponent (bias 16383), then a 64-bit mantissa with an explicit integer bit.
/// NaN for the all-ones exponent (inf and NaN both), so the caller refuses it.
double extended80(const unsigned char* p) {
  const int sign_exp = static_cast<int>(be(p, 2));
  const int exponent = sign_exp & 0x7FFF;
  const std::uint64_t mantissa = be(p + 2, 8);
  if (exponent == 0x7FFF) return std::numeric_limits<double>::quiet_NaN();
  const double magnitude = std::ldexp(static_cast<double>(mantissa), exponent - 16383 - 63);
  return (sign_exp & 0x8000) ? -magnitude : magnitude;
}

/// The sample rate an AIFF's COMM chunk states, when it is not a positive finite number of
/// hertz that libsndfile's conversion to an integer keeps (libsndfile would otherwise analyse
/// the file at a rate it made up, issue 11 class 7).
std::optional<std::string> aiff_rate_problem(double rate) {
  if (std::isfinite(rate) && rate >= 1 && rate <= 2147483647.0) return std::nullopt;
  std::string text = std::isnan(rate) ? "not a number" : std::isinf(rate) ? "infinite" : [&] {
    char buf[32];
    std::snprintf(buf, sizeof buf, "%.6g Hz", rate);
    return std::string(buf);
  }();
  return "the AIFF header's sample rate is " + text +
         " (must be a finite rate of at least 1 Hz): the header is corrupt";
}

// Sony Wave64: GUID-tagged chunks with 64-bit sizes, 8-byte aligned, after a 40-byte header.
std::optional<std::string> w64_problem(std::uint64_t size, const ReadAt& read) {
  unsigned char ch[24];
  std::uint64_t pos = 40;
  for (;;) {
    if (pos + 24 > size || !read(pos, ch, 24)) return cut_in_header(size);
    const std::uint64_t chunk = le(ch + 16, 8);
    if (std::memcmp(ch, kW64Data, 16) == 0) {
      const std::uint64_t declared = chunk >= 24 ? chunk - 24 : 0;
      const std::uint64_t held = size - (pos + 24);
      if (declared > held) return cut_in_data(declared, held);
      return std::nullopt;
    }
    if (chunk < 24) return std::nullopt;  // corrupt: let libsndfile say so
    // A chunk reaching past the end of the file; this also keeps the rounding below from
    // wrapping around for sizes near 2^64, which made pos stand still (a fuzz-found hang,
    // tests/regressions/audio/w64-chunk-size-wraps.w64).
    if (chunk > size - pos) return cut_in_header(size);
    pos += (chunk + 7) / 8 * 8;
  }
}

// RIFF and AIFF pad an odd chunk to an even size; some writers leave the pad byte out. At the
// end of the file that costs nothing; before another chunk it shifts every later chunk by one
// byte, which must be said as such, not as a cut file. `chunk` (odd) is the size of the chunk
// `id` whose header is at `pos`; `big`: sizes are big-endian.
std::optional<std::string> missing_pad_problem(std::uint64_t size, const ReadAt& read, std::uint64_t pos,
                                               std::string_view id, std::uint64_t chunk, bool big, bool aiff) {
  const std::uint64_t next = pos + 8 + chunk + 1;
  const std::uint64_t unpadded = pos + 8 + chunk;
  // A plausible chunk header: a printable four-character code and a size within the file.
  unsigned char at_head[8];
  const auto fourcc = [&](std::uint64_t at) {
    if (at + 8 > size || !read(at, at_head, 8)) return false;
    const std::uint64_t declared = big ? be(at_head + 4, 4) : le(at_head + 4, 4);
    return std::all_of(at_head, at_head + 4, [](unsigned char c) { return c >= 0x20 && c <= 0x7E; }) &&
           (declared <= size - (at + 8) || declared == 0xFFFFFFFFu);
  };
  const std::string what = "odd-sized chunk without its pad byte: the \"" + std::string(id) +
                           "\" chunk at byte " + std::to_string(pos) + " holds " +
                           std::to_string(chunk) + " bytes";
  if (unpadded == size)
    return what + " and ends the file, and no " + (aiff ? "SSND" : "data") +
           " chunk came before it: the file holds no samples";
  if (!fourcc(next) && fourcc(unpadded))
    return what + " (RIFF and AIFF require the pad), so every chunk after it is one byte off; "
                  "rewrite the file with the pad byte";
  return std::nullopt;
}

// RIFF/RIFX/RF64/BW64 and AIFF: 8-byte chunk headers (RF64's data size in its ds64 chunk),
// walked to the data (SSND) chunk; an AIFF's COMM chunk is checked on the way.
std::optional<std::string> riff_aiff_problem(std::string_view tag, std::uint64_t size, const ReadAt& read) {
  const bool riff = tag == "RIFF" || tag == "RIFX" || tag == "RF64" || tag == "BW64";
  const bool aiff = tag == "FORM";
  const bool big = tag == "RIFX" || aiff;
  const bool wide = tag == "RF64" || tag == "BW64";
  const auto u32 = [big](const unsigned char* p) { return big ? be(p, 4) : le(p, 4); };
  unsigned char ch[8];
  std::uint64_t data64 = 0;
  std::uint64_t pos = 12;
  for (;;) {
    if (pos + 8 > size || !read(pos, ch, 8)) return cut_in_header(size);
    const std::string_view id(reinterpret_cast<const char*>(ch), 4);
    const std::uint64_t chunk = u32(ch + 4);
    if (wide && id == "ds64") {
      unsigned char ds[16];
      if (pos + 24 > size || !read(pos + 8, ds, 16)) return cut_in_header(size);
      data64 = le(ds + 8, 8);
    }
    if (riff && id == "data") {
      std::uint64_t declared = chunk;
      if (wide && chunk == 0xFFFFFFFFu) declared = data64;
      if (declared == 0 || (!wide && declared == 0xFFFFFFFFu)) return std::nullopt;  // streamed
      const std::uint64_t held = size - (pos + 8);
      if (declared > held) return cut_in_data(declared, held);
      return std::nullopt;
    }
    if (aiff && id == "COMM") {
      unsigned char comm[18];
      if (chunk < 18 || pos + 26 > size || !read(pos + 8, comm, 18)) return cut_in_header(size);
      if (auto problem = aiff_rate_problem(extended80(comm + 8))) return problem;
    }
    if (aiff && id == "SSND") {
      const std::uint64_t held = size - (pos + 8);
      if (chunk > held) return cut_in_data(chunk >= 8 ? chunk - 8 : 0, held >= 8 ? held - 8 : 0);
      return std::nullopt;
    }
    const std::uint64_t next = pos + 8 + chunk + (chunk & 1);
    if ((chunk & 1) && pos + 8 + chunk <= size)
      if (auto problem = missing_pad_problem(size, read, pos, id, chunk, big, aiff)) return problem;
    if (next > size) return cut_in_header(size);
    pos = next;
  }
}

std::optional<std::string> container_problem(std::uint64_t size, const ReadAt& read) {
  unsigned char head[16] = {};
  if (size < 16 || !read(0, head, 16)) {
    if (size >= 4 && read(0, head, 4)) {
      const std::string_view tag(reinterpret_cast<const char*>(head), 4);
      if (tag == "RIFF" || tag == "RIFX" || tag == "RF64" || tag == "BW64" || tag == "FORM" ||
          tag == "riff")
        return cut_in_header(size);
    }
    return std::nullopt;
  }
  if (std::memcmp(head, kW64Riff, 16) == 0) return w64_problem(size, read);
  const std::string_view tag(reinterpret_cast<const char*>(head), 4);
  if (tag != "RIFF" && tag != "RIFX" && tag != "RF64" && tag != "BW64" && tag != "FORM") return std::nullopt;
  return riff_aiff_problem(tag, size, read);
}

// ---- decoding ----------------------------------------------------------------------------

std::string format_name(int format) {
  switch (format & SF_FORMAT_TYPEMASK) {
    case SF_FORMAT_WAV:
    case SF_FORMAT_WAVEX: return "wav";
    case SF_FORMAT_RF64: return "rf64";
    case SF_FORMAT_W64: return "w64";
    case SF_FORMAT_AIFF: return "aiff";
    case SF_FORMAT_FLAC: return "flac";
    case SF_FORMAT_OGG: return "ogg";
    case SF_FORMAT_AU: return "au";
    case SF_FORMAT_CAF: return "caf";
    default: return "audio";
  }
}

std::string encoding_name(int format) {
  SF_FORMAT_INFO info{};
  info.format = format & SF_FORMAT_SUBMASK;
  if (sf_command(nullptr, SFC_GET_FORMAT_INFO, &info, sizeof info) == 0 && info.name) return info.name;
  return "unknown";
}

std::string sndfile_reason(SNDFILE* file) {
  std::string reason = sf_strerror(file);
  while (!reason.empty() && (reason.back() == '.' || reason.back() == '\n' || reason.back() == ' '))
    reason.pop_back();
  return reason;
}

struct Closer {
  void operator()(SNDFILE* f) const { sf_close(f); }
};
using SndFile = std::unique_ptr<SNDFILE, Closer>;

// `file_bytes` bounds the reservation: uncompressed PCM has fewer frames than bytes, and a
// compressed file's declared frame count is not trusted for a large allocation up front.
Capture decode(SNDFILE* file, const SF_INFO& info, const std::string& name, std::uint64_t file_bytes) {
  Capture capture;
  capture.source = name;
  capture.format = format_name(info.format);
  capture.sample_rate_hz = info.samplerate;
  capture.t0_s = 0;
  capture.metadata.emplace_back("encoding", encoding_name(info.format));
  const std::pair<int, const char*> tags[] = {
      {SF_STR_TITLE, "title"},     {SF_STR_ARTIST, "artist"}, {SF_STR_COMMENT, "comment"},
      {SF_STR_DATE, "date"},       {SF_STR_SOFTWARE, "software"}, {SF_STR_COPYRIGHT, "copyright"}};
  for (const auto& [id, key] : tags)
    if (const char* value = sf_get_string(file, id); value && *value) capture.metadata.emplace_back(key, value);
  if (info.channels <= 0 || info.samplerate <= 0)
    throw InputError(name, 0, 0, "corrupt audio header (" + std::to_string(info.channels) +
                                     " channels at " + std::to_string(info.samplerate) + " Hz)");
  if (info.frames <= 0) throw InputError(name, 0, 0, "no samples (the audio file holds 0 frames)");
  const auto channels = static_cast<std::size_t>(info.channels);
  capture.channels.resize(channels);
  for (std::size_t c = 0; c < channels; ++c) {
    capture.channels[c].name = "ch" + std::to_string(c);
    capture.channels[c].unit = "FS";
    capture.channels[c].samples.reserve(
        static_cast<std::size_t>(std::min<std::uint64_t>(static_cast<std::uint64_t>(info.frames), file_bytes)));
  }
  // Full scale ±1 for integer PCM (divide by 2^(N-1)); libsndfile's default, made explicit.
  sf_command(file, SFC_SET_NORM_DOUBLE, nullptr, SF_TRUE);
  std::vector<double> block(static_cast<std::size_t>(kBlockFrames) * channels);
  sf_count_t total = 0;
  for (;;) {
    const sf_count_t n = sf_readf_double(file, block.data(), kBlockFrames);
    if (n <= 0) break;
    for (std::size_t c = 0; c < channels; ++c) {
      auto& out = capture.channels[c].samples;
      for (sf_count_t k = 0; k < n; ++k) out.push_back(block[static_cast<std::size_t>(k) * channels + c]);
    }
    total += n;
  }
  if (sf_error(file) != SF_ERR_NO_ERROR)
    throw InputError(name, 0, 0, "corrupt audio data (libsndfile: " + sndfile_reason(file) + ")");
  if (total < info.frames)
    throw InputError(name, 0, 0,
                     "truncated or corrupt audio file: the header declares " + std::to_string(info.frames) +
                         " frames, " + std::to_string(total) + " could be decoded");
  for (const auto& ch : capture.channels)
    for (std::size_t k = 0; k < ch.samples.size(); ++k)
      if (!std::isfinite(ch.samples[k]))
        throw InputError(name, 0, 0,
                         "sample " + std::to_string(k) + " of channel " + ch.name + " is not a finite number");
  return capture;
}

// libsndfile virtual I/O over bytes in memory.
struct Memory {
  std::string_view bytes;
  sf_count_t position = 0;
};
sf_count_t memory_length(void* user) { return static_cast<sf_count_t>(static_cast<Memory*>(user)->bytes.size()); }
sf_count_t memory_seek(sf_count_t offset, int whence, void* user) {
  auto* m = static_cast<Memory*>(user);
  const auto size = static_cast<sf_count_t>(m->bytes.size());
  sf_count_t target = offset;
  if (whence == SEEK_CUR) target = m->position + offset;
  if (whence == SEEK_END) target = size + offset;
  m->position = std::clamp<sf_count_t>(target, 0, size);
  return m->position;
}
sf_count_t memory_read(void* out, sf_count_t count, void* user) {
  auto* m = static_cast<Memory*>(user);
  const auto size = static_cast<sf_count_t>(m->bytes.size());
  const sf_count_t n = std::max<sf_count_t>(0, std::min(count, size - m->position));
  std::memcpy(out, m->bytes.data() + m->position, static_cast<std::size_t>(n));
  m->position += n;
  return n;
}
sf_count_t memory_write(const void*, sf_count_t, void*) { return 0; }
sf_count_t memory_tell(void* user) { return static_cast<Memory*>(user)->position; }

[[noreturn]] void open_failed(const std::string& name) {
  throw InputError(name, 0, 0, "not a readable audio file (libsndfile: " + sndfile_reason(nullptr) + ")");
}

}  // namespace

bool looks_like_audio(std::string_view head, std::string_view path) {
  static constexpr std::string_view kMagic[] = {"RIFF", "RIFX", "RF64", "BW64", "FORM",
                                                "fLaC", "OggS", ".snd", "caff"};
  for (auto m : kMagic)
    if (head.substr(0, 4) == m) return true;
  if (head.size() >= 16 && std::memcmp(head.data(), kW64Riff, 16) == 0) return true;
  static constexpr std::string_view kExtensions[] = {"wav", "wave", "flac", "aif", "aiff", "aifc",
                                                     "w64", "rf64", "ogg", "au", "caf"};
  const std::string ext = lower_extension(path);
  return std::find(std::begin(kExtensions), std::end(kExtensions), ext) != std::end(kExtensions);
}

namespace {

// BW64 (ITU-R BS.2088) is RF64 (EBU Tech 3306) under another marker: same ds64 and chunk
// layout. libsndfile 1.2 knows only the RF64 marker, so a BW64 file is handed to it through
// virtual I/O that shows "RF64" in the first four bytes and the file as it is everywhere else.
struct Bw64File {
  int fd = -1;
  sf_count_t size = 0;
  sf_count_t position = 0;
};
sf_count_t bw64_length(void* user) { return static_cast<Bw64File*>(user)->size; }
sf_count_t bw64_seek(sf_count_t offset, int whence, void* user) {
  auto* f = static_cast<Bw64File*>(user);
  sf_count_t target = offset;
  if (whence == SEEK_CUR) target = f->position + offset;
  if (whence == SEEK_END) target = f->size + offset;
  f->position = std::clamp<sf_count_t>(target, 0, f->size);
  return f->position;
}
sf_count_t bw64_read(void* out, sf_count_t count, void* user) {
  auto* f = static_cast<Bw64File*>(user);
  const sf_count_t n = std::max<sf_count_t>(0, std::min(count, f->size - f->position));
  sf_count_t done = 0;
  while (done < n) {
    const ssize_t got = ::pread(f->fd, static_cast<char*>(out) + done, static_cast<std::size_t>(n - done),
                                static_cast<off_t>(f->position + done));
    if (got < 0 && errno == EINTR) continue;
    if (got <= 0) break;
    done += got;
  }
  static constexpr char kRf64[4] = {'R', 'F', '6', '4'};
  for (sf_count_t i = f->position; i < f->position + done && i < 4; ++i)
    static_cast<char*>(out)[i - f->position] = kRf64[i];
  f->position += done;
  return done;
}
sf_count_t bw64_write(const void*, sf_count_t, void*) { return 0; }
sf_count_t bw64_tell(void* user) { return static_cast<Bw64File*>(user)->position; }

bool is_bw64(std::string_view head) { return head.substr(0, 4) == "BW64"; }

}  // namespace

Capture read_audio(const std::string& path) {
  FileHandle handle = FileHandle::open_readable(path);  // closed on every way out
  const int fd = handle.fd();
  const auto size = handle.size();
  const ReadAt read_at = [fd](std::uint64_t offset, void* out, std::size_t n) {
    if (n == 0) return false;
    const ssize_t got = ::pread(fd, out, n, static_cast<off_t>(offset));
    return got == static_cast<ssize_t>(n);
  };
  if (auto problem = container_problem(size, read_at)) throw InputError(path, 0, 0, *problem);
  char head[4] = {};
  if (size >= 4 && read_at(0, head, 4) && is_bw64(std::string_view(head, 4))) {
    Bw64File bw{fd, static_cast<sf_count_t>(size), 0};
    SF_VIRTUAL_IO io{bw64_length, bw64_seek, bw64_read, bw64_write, bw64_tell};
    SF_INFO info{};
    // Declared after `handle`, so libsndfile lets go of the descriptor before it is closed.
    SndFile file(sf_open_virtual(&io, SFM_READ, &info, &bw));
    if (!file) open_failed(path);
    Capture capture = decode(file.get(), info, path, size);
    capture.format = "bw64";
    return capture;
  }
  SF_INFO info{};
  // close_desc = true: libsndfile owns the descriptor from here on.
  SndFile file(sf_open_fd(handle.release(), SFM_READ, &info, SF_TRUE));
  if (!file) open_failed(path);
  return decode(file.get(), info, path, size);
}

Capture parse_audio(std::string_view bytes, std::string_view name) {
  const std::string source(name);
  const ReadAt read_at = [bytes](std::uint64_t offset, void* out, std::size_t n) {
    if (n == 0 || offset + n > bytes.size()) return false;
    std::memcpy(out, bytes.data() + offset, n);
    return true;
  };
  if (auto problem = container_problem(bytes.size(), read_at)) throw InputError(source, 0, 0, *problem);
  // BW64 read as RF64 (see Bw64File): a copy with the RF64 marker.
  std::string patched;
  if (is_bw64(bytes)) {
    patched.assign(bytes);
    patched.replace(0, 4, "RF64");
    bytes = patched;
  }
  SF_VIRTUAL_IO io{memory_length, memory_seek, memory_read, memory_write, memory_tell};
  Memory memory{bytes, 0};
  SF_INFO info{};
  SndFile file(sf_open_virtual(&io, SFM_READ, &info, &memory));
  if (!file) open_failed(source);
  Capture capture = decode(file.get(), info, source, bytes.size());
  if (!patched.empty()) capture.format = "bw64";
  return capture;
}

}  // namespace periodfit::io

#include "io/capture_reader.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cmath>
#include <string_view>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "io/audio_reader.hpp"
#include "io/csv_reader.hpp"
#include "core/number_format.hpp"
#include "io/output_file.hpp"

namespace periodfit::io {

namespace {

// What the path is: a missing path, a directory or a permission problem is one IoError before
// any parser runs. For a regular file, its first bytes (to recognise audio by its magic
// number); a pipe or device is not read here, since what is read from it is gone.
struct Probe {
  bool regular = false;
  std::string head;
};

Probe probe(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) throw IoError(path, "cannot open", errno);
  struct stat info {};
  if (::fstat(fd, &info) != 0 || S_ISDIR(info.st_mode)) {
    const int e = S_ISDIR(info.st_mode) ? EISDIR : errno;
    ::close(fd);
    throw IoError(path, "cannot read", e);
  }
  Probe p;
  p.regular = S_ISREG(info.st_mode);
  if (!p.regular) {
    ::close(fd);
    return p;
  }
  char head[16];
  ssize_t n = 0;
  do {
    n = ::read(fd, head, sizeof head);
  } while (n < 0 && errno == EINTR);
  const int e = errno;
  ::close(fd);
  if (n < 0) throw IoError(path, "cannot read", e);
  p.head.assign(head, static_cast<std::size_t>(n));
  return p;
}

// A pipe or device, read whole (what is read from it is gone) up to max_piped_capture_bytes().
// Capture text never holds a NUL byte, so once the first bytes show no audio magic number a NUL
// ends the read at once: an endless binary device (/dev/zero, /dev/urandom) is refused in
// microseconds instead of after gigabytes (issue 11, class 5).
std::string read_piped(const std::string& path) {
  bool text = false;  // decided once 16 bytes (the longest magic number looked at) have arrived
  return read_file(path, max_piped_capture_bytes(), [&](const std::string& bytes, std::size_t before) {
    if (!text && bytes.size() >= 16) text = !looks_like_audio(std::string_view(bytes).substr(0, 16), path);
    if (!text) return;
    const std::size_t from = before >= 16 ? before : 0;
    if (const auto nul = bytes.find('\0', from); nul != std::string::npos)
      throw InputError(path, 0, 0,
                       "holds a NUL byte at byte " + std::to_string(nul) +
                           ": neither CSV text nor an audio format periodfit reads");
  });
}

void validate(const ReadOptions& options) {
  if (!std::isfinite(options.rate_hz) || options.rate_hz < 0)
    throw OptionError("rate_hz", format_shortest(options.rate_hz),
                      "must be > 0, or 0 to take the rate from the file");
  for (std::size_t i = 0; i < options.scales.size(); ++i) {
    const auto& [channel, factor] = options.scales[i];
    if (!std::isfinite(factor) || factor == 0)
      throw OptionError("scale " + channel, format_shortest(factor), "must be a finite, non-zero factor");
    for (std::size_t j = 0; j < i; ++j)
      if (options.scales[j].first == channel)
        throw OptionError("scale " + channel, format_shortest(factor), "the channel is scaled twice");
  }
  for (std::size_t i = 0; i < options.units.size(); ++i)
    for (std::size_t j = 0; j < i; ++j)
      if (options.units[j].first == options.units[i].first)
        throw OptionError("unit " + options.units[i].first, options.units[i].second,
                          "the channel is given a unit twice");
}

}  // namespace

void apply_read_options(Capture& capture, const ReadOptions& options) {
  validate(options);
  if (options.rate_hz > 0) {
    capture.sample_rate_hz = options.rate_hz;
    capture.time_base = TimeBase{};
    capture.time_base.source = TimeBase::Source::rate_option;
  }
  // Resolve every selector before changing anything, so a bad name leaves the capture as is.
  std::vector<std::size_t> scaled, united;
  for (const auto& [channel, factor] : options.scales) scaled.push_back(capture.channel_index(channel));
  for (const auto& [channel, unit] : options.units) united.push_back(capture.channel_index(channel));
  // A scale may carry a sample past the double range; inf is an invented value, not data.
  for (std::size_t i = 0; i < scaled.size(); ++i) {
    const Channel& ch = capture.channels[scaled[i]];
    for (std::size_t k = 0; k < ch.samples.size(); ++k)
      if (!std::isfinite(ch.samples[k] * options.scales[i].second))
        throw OptionError("scale " + options.scales[i].first, format_shortest(options.scales[i].second),
                          "sample " + std::to_string(k) + " of channel " + ch.name + " (" +
                              format_shortest(ch.samples[k]) +
                              ") times the factor exceeds the range of double precision numbers");
  }
  for (std::size_t i = 0; i < scaled.size(); ++i)
    for (double& v : capture.channels[scaled[i]].samples) v *= options.scales[i].second;
  for (std::size_t i = 0; i < united.size(); ++i) capture.channels[united[i]].unit = options.units[i].second;
}

namespace {
Capture read_capture_unguarded(const std::string& path, const ReadOptions& options) {
  validate(options);
  const Probe p = probe(path);
  // A pipe or device is read whole, once; a regular file is streamed by its reader.
  const std::string bytes = p.regular ? std::string() : read_piped(path);
  const std::string_view head = p.regular ? std::string_view(p.head) : std::string_view(bytes).substr(0, 16);
  Capture capture;
  if (looks_like_audio(head, path)) {
    if (!options.time_column.empty() && options.time_column != "none")
      throw OptionError("time_column", options.time_column, "audio files have no time column");
    capture = p.regular ? read_audio(path) : parse_audio(bytes, path);
  } else {
    CsvOptions csv;
    csv.rate_hz = options.rate_hz;
    csv.time_column = options.time_column;
    capture = p.regular ? read_csv(path, csv) : parse_csv(bytes, path, csv);
  }
  // The InputError names the file first (path: unknown channel …), so the selector's own
  // message is built without it.
  std::string source;
  std::swap(source, capture.source);
  try {
    apply_read_options(capture, options);
  } catch (const UnknownNameError& e) {
    throw InputError(path, 0, 0, e.what());
  }
  // Every reader must give a positive, finite rate: a sub-normal time step makes 1/Δt = inf,
  // and an audio header may hold any bit pattern (issue 11, class 7).
  if (!std::isfinite(capture.sample_rate_hz) || !(capture.sample_rate_hz > 0))
    throw InputError(path, 0, 0,
                     "the sample rate works out to " + format_shortest(capture.sample_rate_hz) +
                         " Hz, which is not a positive finite number; give it with --rate HZ");
  std::swap(source, capture.source);
  return capture;
}

}  // namespace

Capture read_capture(const std::string& path, const ReadOptions& options) {
  return with_memory_step("reading " + path, [&] { return read_capture_unguarded(path, options); });
}

}  // namespace periodfit::io

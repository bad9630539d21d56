// Audio import through libsndfile: files are written here through libsndfile with known integer
// codes for each PCM width, and read back against libsndfile's documented normalisation; cut
// and corrupt files give whole, clear messages.
#include <doctest/doctest.h>
#include <sndfile.h>

#include <cmath>
#include <cstdint>
#include <string>
#include <vector>

#include "core/error.hpp"
#include "io/audio_reader.hpp"
#include "io/capture_reader.hpp"
#include "support/cli_runner.hpp"

using namespace periodfit;

namespace {

/// Integer codes divided by a power of two are exact doubles: the comparison is exact.
constexpr double kExact = 0;

// Frames of 2 channels: full-scale negative, zero, half scale, and the largest positive code.
// libsndfile's sf_read_double with SFC_SET_NORM_DOUBLE true (its default; libsndfile API
// documentation, "Note 2" of sf_read_double: "the data is normalised so that the range is
// -1.0 to 1.0") divides 8-bit codes by 0x80, 16-bit by 0x8000, 24-bit by 0x800000 and 32-bit by 0x80000000
// (src/pcm.c in libsndfile: normfact = 1.0 / 0x8000 etc.).
struct Width {
  const char* name;
  int subtype;
  int bits;
};
constexpr Width kWidths[] = {
    {"PCM 8 (unsigned in WAV)", SF_FORMAT_PCM_U8, 8}, {"PCM 16", SF_FORMAT_PCM_16, 16}, {"PCM 24", SF_FORMAT_PCM_24, 24}, {"PCM 32", SF_FORMAT_PCM_32, 32}};

/// Codes as libsndfile's int interface takes them: left-justified in 32 bits.
std::vector<int> codes_left_justified(int bits) {
  const std::int64_t full = std::int64_t{1} << (bits - 1);  // 2^(N-1)
  const std::vector<std::int64_t> codes = {-full, 0, full / 2, full - 1, -full / 4, 1};
  std::vector<int> out;
  for (auto c : codes) out.push_back(static_cast<int>(c * (std::int64_t{1} << (32 - bits))));
  return out;
}

std::vector<double> expected_normalised(int bits) {
  const double full = std::ldexp(1.0, bits - 1);
  const std::int64_t f = std::int64_t{1} << (bits - 1);
  return {-1.0, 0.0, 0.5, static_cast<double>(f - 1) / full, -0.25, 1.0 / full};
}

void write_ints(const std::string& path, int format, const std::vector<int>& interleaved, int channels, int rate) {
  SF_INFO info{};
  info.samplerate = rate;
  info.channels = channels;
  info.format = format;
  SNDFILE* f = sf_open(path.c_str(), SFM_WRITE, &info);
  REQUIRE_MESSAGE(f != nullptr, sf_strerror(nullptr));
  REQUIRE(sf_write_int(f, interleaved.data(), static_cast<sf_count_t>(interleaved.size())) ==
          static_cast<sf_count_t>(interleaved.size()));
  sf_close(f);
}

std::string message_of(const std::string& path) {
  try {
    io::read_capture(path);
  } catch (const Error& e) {
    return e.what();
  }
  return "(no error)";
}

}  // namespace

TEST_CASE("audio: PCM 8/16/24/32 in WAV read as code / 2^(N-1), unit FS, channels ch0 ch1") {
  const test::TempDir dir("audio_pcm");
  for (const auto& w : kWidths) {
    CAPTURE(w.name);
    const auto codes = codes_left_justified(w.bits);
    // Channel 0 holds the codes, channel 1 their negatives (except the most negative).
    std::vector<int> interleaved;
    for (int c : codes) {
      interleaved.push_back(c);
      interleaved.push_back(c == INT32_MIN ? 0 : -c);
    }
    const std::string path = dir.file(std::string("pcm") + std::to_string(w.bits) + ".wav");
    write_ints(path, SF_FORMAT_WAV | w.subtype, interleaved, 2, 48000);
    const Capture c = io::read_capture(path);
    CHECK(c.format == "wav");
    CHECK(c.sample_rate_hz == 48000.0);
    CHECK(c.t0_s == 0);
    REQUIRE(c.channels.size() == 2);
    CHECK(c.channel_names() == std::vector<std::string>{"ch0", "ch1"});
    CHECK(c.channels[0].unit == "FS");
    const auto expected = expected_normalised(w.bits);
    REQUIRE(c.channels[0].samples.size() == expected.size());
    for (std::size_t k = 0; k < expected.size(); ++k) {
      CHECK(std::fabs(c.channels[0].samples[k] - expected[k]) <= kExact);
      CHECK(std::fabs(c.channels[1].samples[k] - (k == 0 ? 0.0 : -expected[k])) <= kExact);
    }
    CHECK(c.metadata.front().first == "encoding");
  }
}

TEST_CASE("audio: float WAV samples are read as stored, beyond full scale too") {
  const test::TempDir dir("audio_float");
  const std::string path = dir.file("f.wav");
  SF_INFO info{};
  info.samplerate = 44100;
  info.channels = 1;
  info.format = SF_FORMAT_WAV | SF_FORMAT_FLOAT;
  SNDFILE* f = sf_open(path.c_str(), SFM_WRITE, &info);
  REQUIRE(f);
  const std::vector<float> values = {0.25f, -1.5f, 0.1f, 3.0f};
  sf_write_float(f, values.data(), 4);
  sf_close(f);
  const Capture c = io::read_capture(path);
  REQUIRE(c.sample_count() == 4);
  for (std::size_t k = 0; k < 4; ++k) CHECK(c.channels[0].samples[k] == static_cast<double>(values[k]));
}

TEST_CASE("audio: RF64, W64, FLAC and AIFF give the same samples as WAV") {
  const test::TempDir dir("audio_containers");
  struct Container {
    const char* file;
    int format;
    const char* name;
  };
  const Container containers[] = {
      {"a.rf64", SF_FORMAT_RF64 | SF_FORMAT_PCM_24, "rf64"}, {"a.w64", SF_FORMAT_W64 | SF_FORMAT_PCM_16, "w64"},
      {"a.flac", SF_FORMAT_FLAC | SF_FORMAT_PCM_24, "flac"}, {"a.aiff", SF_FORMAT_AIFF | SF_FORMAT_PCM_16, "aiff"},
      {"a.flac16", SF_FORMAT_FLAC | SF_FORMAT_PCM_16, "flac"}};
  for (const auto& k : containers) {
    CAPTURE(k.file);
    const int bits = (k.format & SF_FORMAT_SUBMASK) == SF_FORMAT_PCM_24 ? 24 : 16;
    write_ints(dir.file(k.file), k.format, codes_left_justified(bits), 1, 96000);
    // ".flac16" is no audio extension: the FLAC magic number is what is recognised.
    const Capture c = io::read_capture(dir.file(k.file));
    CHECK(c.format == k.name);
    CHECK(c.sample_rate_hz == 96000.0);
    CHECK(c.channels[0].samples == expected_normalised(bits));
  }
}

TEST_CASE("audio: recognised by magic number under a misleading name; scale and unit apply") {
  const test::TempDir dir("audio_magic");
  write_ints(dir.file("capture.csv"), SF_FORMAT_WAV | SF_FORMAT_PCM_16, codes_left_justified(16), 1, 8000);
  io::ReadOptions options;
  options.scales = {{"ch0", 2.5}};  // 2.5 V per full scale
  options.units = {{"0", "V"}};
  const Capture c = io::read_capture(dir.file("capture.csv"), options);
  CHECK(c.format == "wav");
  CHECK(c.channels[0].unit == "V");
  CHECK(c.channels[0].samples[2] == 1.25);  // half scale × 2.5 V
  options.scales = {{"ch1", 2.0}};
  options.units = {};
  CHECK(message_of(dir.file("capture.csv")) == "(no error)");
  CHECK_THROWS_WITH_AS(io::read_capture(dir.file("capture.csv"), options),
                       (dir.file("capture.csv") + ": unknown channel \"ch1\" (did you mean \"ch0\"? channels: ch0)").c_str(),
                       InputError);
}

TEST_CASE("audio: cut in the header, cut in the data, corrupt and empty files are clear errors") {
  const test::TempDir dir("audio_cut");
  std::vector<int> samples(2000);
  for (std::size_t k = 0; k < samples.size(); ++k) samples[k] = static_cast<int>(k) << 16;
  write_ints(dir.file("whole.wav"), SF_FORMAT_WAV | SF_FORMAT_PCM_16, samples, 2, 8000);
  const std::string whole = test::slurp(dir.file("whole.wav"));
  REQUIRE(whole.size() == 44 + 4000);  // canonical 44-byte header + 1000 frames × 2 × 2 bytes
  const auto cut = [&](std::size_t bytes, const std::string& name) {
    test::write_text(dir.file(name), whole.substr(0, bytes));
    return message_of(dir.file(name));
  };
  CHECK(cut(10, "h10.wav") == dir.file("h10.wav") +
                                  ": truncated audio file: cut in the header (the file ends at byte 10, before "
                                  "the sample data)");
  CHECK(cut(30, "h30.wav") == dir.file("h30.wav") +
                                  ": truncated audio file: cut in the header (the file ends at byte 30, before "
                                  "the sample data)");
  CHECK(cut(1000, "d.wav") == dir.file("d.wav") +
                                  ": truncated audio file: cut in the data (the header declares 4000 bytes of "
                                  "samples, the file holds 956)");
  CHECK(cut(whole.size() - 1, "d1.wav") == dir.file("d1.wav") +
                                               ": truncated audio file: cut in the data (the header declares "
                                               "4000 bytes of samples, the file holds 3999)");
  // AIFF and W64 are walked the same way.
  write_ints(dir.file("whole.aiff"), SF_FORMAT_AIFF | SF_FORMAT_PCM_16, samples, 2, 8000);
  const std::string aiff = test::slurp(dir.file("whole.aiff"));
  test::write_text(dir.file("cut.aiff"), aiff.substr(0, aiff.size() - 100));
  CHECK(message_of(dir.file("cut.aiff")).find(": truncated audio file: cut in the data (the header declares 4000 "
                                              "bytes of samples") != std::string::npos);
  write_ints(dir.file("whole.w64"), SF_FORMAT_W64 | SF_FORMAT_PCM_16, samples, 2, 8000);
  const std::string w64 = test::slurp(dir.file("whole.w64"));
  test::write_text(dir.file("cut.w64"), w64.substr(0, w64.size() - 100));
  CHECK(message_of(dir.file("cut.w64")).find(": truncated audio file: cut in the data") != std::string::npos);
  // FLAC has no chunk sizes; the decoder finds fewer frames than STREAMINFO declares.
  write_ints(dir.file("whole.flac"), SF_FORMAT_FLAC | SF_FORMAT_PCM_16, samples, 2, 8000);
  const std::string flac = test::slurp(dir.file("whole.flac"));
  test::write_text(dir.file("cut.flac"), flac.substr(0, flac.size() * 2 / 3));
  const std::string flac_message = message_of(dir.file("cut.flac"));
  CHECK(flac_message.rfind(dir.file("cut.flac") + ": ", 0) == 0);
  CHECK((flac_message.find("truncated or corrupt audio file: the header declares 1000 frames") != std::string::npos ||
         flac_message.find("corrupt audio data (libsndfile: ") != std::string::npos));
  // Not audio at all, but named .wav; and a header with no frames.
  test::write_text(dir.file("text.wav"), "t,v\n0,1\n");
  CHECK(message_of(dir.file("text.wav")) ==
        dir.file("text.wav") + ": not a readable audio file (libsndfile: Format not recognised)");
  write_ints(dir.file("empty.wav"), SF_FORMAT_WAV | SF_FORMAT_PCM_16, {}, 1, 8000);
  CHECK(message_of(dir.file("empty.wav")) == dir.file("empty.wav") + ": no samples (the audio file holds 0 frames)");
}

TEST_CASE("audio: parse_audio decodes bytes in memory like a file") {
  const test::TempDir dir("audio_memory");
  write_ints(dir.file("m.wav"), SF_FORMAT_WAV | SF_FORMAT_PCM_24, codes_left_justified(24), 1, 22050);
  const std::string bytes = test::slurp(dir.file("m.wav"));
  const Capture c = io::parse_audio(bytes, "memory.wav");
  CHECK(c.source == "memory.wav");
  CHECK(c.channels[0].samples == expected_normalised(24));
  // 6 samples × 3 bytes = 18 bytes of data; 3 cut off leave 15.
  CHECK_THROWS_WITH_AS(io::parse_audio(bytes.substr(0, bytes.size() - 3), "memory.wav"),
                       "memory.wav: truncated audio file: cut in the data (the header declares 18 bytes of samples, "
                       "the file holds 15)",
                       InputError);
}

// ---- issue 11, classes 7 and 10: rates that are no rates, odd chunks, BW64 ---------------------

namespace {

void put_le32(std::string& s, std::uint32_t v) {
  for (int i = 0; i < 4; ++i) s += static_cast<char>((v >> (8 * i)) & 0xFF);
}
void put_be32(std::string& s, std::uint32_t v) {
  for (int i = 3; i >= 0; --i) s += static_cast<char>((v >> (8 * i)) & 0xFF);
}

/// A mono 16-bit AIFF of 4 frames whose COMM chunk states `rate80` (10 bytes, 80-bit extended).
std::string aiff_with_rate(const std::string& rate80) {
  std::string comm = "COMM";
  put_be32(comm, 18);
  comm += std::string("\x00\x01", 2);  // channels
  put_be32(comm, 4);                   // frames
  comm += std::string("\x00\x10", 2);  // 16 bits
  comm += rate80;
  std::string ssnd = "SSND";
  put_be32(ssnd, 8 + 8);
  ssnd += std::string(8, '\0');  // offset, block size
  ssnd += std::string("\x10\x00\xF0\x00\x10\x00\xF0\x00", 8);
  std::string body = "AIFF" + comm + ssnd;
  std::string file = "FORM";
  put_be32(file, static_cast<std::uint32_t>(body.size()));
  return file + body;
}

/// A mono 16-bit RIFF WAV at 8000 Hz with `extra` chunks between fmt and data, 4 samples.
std::string wav_with(const std::string& extra, const std::string& marker = "RIFF") {
  std::string fmt = "fmt ";
  put_le32(fmt, 16);
  fmt += std::string("\x01\x00\x01\x00", 4);
  put_le32(fmt, 8000);
  put_le32(fmt, 16000);
  fmt += std::string("\x02\x00\x10\x00", 4);
  std::string data = "data";
  put_le32(data, 8);
  data += std::string("\x00\x10\x00\xF0\x00\x10\x00\xF0", 8);
  const std::string body = "WAVE" + fmt + extra + data;
  std::string file = marker;
  put_le32(file, static_cast<std::uint32_t>(body.size()));
  return file + body;
}

std::string parse_message(const std::string& bytes, const std::string& name) {
  try {
    io::parse_audio(bytes, name);
  } catch (const Error& e) {
    return e.what();
  }
  return "(no error)";
}

}  // namespace

TEST_CASE("audio: an AIFF sample rate of NaN or 0 is a corrupt header, not an invented rate") {
  // 80-bit extended (AIFF 1.3): all-ones exponent with a non-zero fraction is NaN; all zero is 0.
  const std::string nan80("\x7F\xFF\xC0\x00\x00\x00\x00\x00\x00\x00", 10);
  const std::string zero80(10, '\0');
  // 8000 = 1.953125·2^12: exponent 16383 + 12 = 0x400B, mantissa 0xFA00… (integer bit set).
  const std::string rate8000("\x40\x0B\xFA\x00\x00\x00\x00\x00\x00\x00", 10);
  CHECK(parse_message(aiff_with_rate(nan80), "nan.aiff") ==
        "nan.aiff: the AIFF header's sample rate is not a number (must be a finite rate of at least 1 "
        "Hz): the header is corrupt");
  CHECK(parse_message(aiff_with_rate(zero80), "zero.aiff") ==
        "zero.aiff: the AIFF header's sample rate is 0 Hz (must be a finite rate of at least 1 Hz): the "
        "header is corrupt");
  const Capture ok = io::parse_audio(aiff_with_rate(rate8000), "ok.aiff");
  CHECK(ok.sample_rate_hz == 8000);
}

TEST_CASE("audio: an odd chunk without its pad byte is named as such, not as a cut file") {
  std::string list = "LIST";
  put_le32(list, 5);
  list += "INFOx";  // 5 bytes, no pad byte
  CHECK(parse_message(wav_with(list), "odd.wav") ==
        "odd.wav: odd-sized chunk without its pad byte: the \"LIST\" chunk at byte 36 holds 5 bytes "
        "(RIFF and AIFF require the pad), so every chunk after it is one byte off; rewrite the file "
        "with the pad byte");
  // With its pad byte the same file reads.
  const Capture padded = io::parse_audio(wav_with(list + '\0'), "padded.wav");
  CHECK(padded.sample_count() == 4);
}

TEST_CASE("audio: BW64 (ITU-R BS.2088) reads like RF64, from memory and from a file") {
  // RF64/BW64 layout (EBU Tech 3306): marker, 0xFFFFFFFF, WAVE, ds64 with the 64-bit sizes.
  std::string fmt = "fmt ";
  put_le32(fmt, 16);
  fmt += std::string("\x01\x00\x01\x00", 4);
  put_le32(fmt, 8000);
  put_le32(fmt, 16000);
  fmt += std::string("\x02\x00\x10\x00", 4);
  const std::string samples("\x00\x10\x00\xF0\x00\x10\x00\xF0", 8);
  std::string data = "data";
  put_le32(data, 0xFFFFFFFFu);
  data += samples;
  const auto file_of = [&](const std::string& marker) {
    std::string ds64 = "ds64";
    put_le32(ds64, 28);
    const std::uint64_t riff_size = 4 + 36 + fmt.size() + data.size();
    for (std::uint64_t v : {riff_size, std::uint64_t{8}, std::uint64_t{4}})
      for (int i = 0; i < 8; ++i) ds64 += static_cast<char>((v >> (8 * i)) & 0xFF);
    put_le32(ds64, 0);
    std::string f = marker;
    put_le32(f, 0xFFFFFFFFu);
    return f + "WAVE" + ds64 + fmt + data;
  };
  const Capture rf = io::parse_audio(file_of("RF64"), "a.rf64");
  const Capture bw = io::parse_audio(file_of("BW64"), "a.wav");
  CHECK(bw.format == "bw64");
  REQUIRE(bw.channels.size() == 1);
  CHECK(bw.channels[0].samples == rf.channels[0].samples);
  CHECK(bw.sample_rate_hz == 8000);
  test::TempDir dir("audio_bw64");
  test::write_text(dir.file("b.wav"), file_of("BW64"));
  const Capture from_file = io::read_capture(dir.file("b.wav"));
  CHECK(from_file.format == "bw64");
  CHECK(from_file.channels[0].samples == rf.channels[0].samples);
}

#pragma once
/// Reading audio captures through libsndfile: WAV, RF64/BW64, Sony W64, FLAC, AIFF/AIFC and the
/// other containers libsndfile opens, with PCM 8/16/24/32-bit or float samples.
///
/// Samples are in full-scale units (unit "FS", ±1 at full scale), read with sf_read_double
/// under SFC_SET_NORM_DOUBLE = true (libsndfile's default, set explicitly): integer PCM is
/// divided by 0x80 / 0x8000 / 0x800000 / 0x80000000 for 8/16/24/32-bit, so the most negative
/// code reads exactly -1.0 and the most positive (2^(N-1)-1)/2^(N-1); float files are read as
/// stored. Channels are named ch0, ch1, …; t0 is 0; the rate is the header's.
///
/// libsndfile silently shortens a file whose data chunk is cut, so the container is walked
/// first (RIFF/RIFX/RF64/W64/AIFF chunk sizes against the file size) and a cut file is an
/// InputError saying whether it was cut in the header or in the data.
#include <string>
#include <string_view>

#include "core/capture.hpp"

namespace periodfit::io {

/// True when `head` (the first bytes of a file, 16 are enough) starts with an audio magic
/// number (RIFF, RIFX, RF64, BW64, FORM, fLaC, OggS, the W64 "riff" GUID, .snd, caff), or when
/// `path` ends in an audio extension (.wav .flac .aif .aiff .aifc .w64 .rf64 .ogg .au .caf).
bool looks_like_audio(std::string_view head, std::string_view path);

/// Reads the audio file at `path`. Throws IoError for OS failures and InputError for a file
/// that is cut, corrupt or not audio.
Capture read_audio(const std::string& path);

/// Decodes an audio file held in memory (for tests and fuzzing); `name` is used in messages
/// and as Capture::source.
Capture parse_audio(std::string_view bytes, std::string_view name);

}  // namespace periodfit::io

// libFuzzer target: the CSV importer (io::parse_csv) on arbitrary text, under every kind of
// CsvOptions the command line can produce. The first byte picks the options so the fuzzer
// explores the rate-override and time-column paths as well as detection; the rest is the text.
#include <cstddef>
#include <cstdint>

#include "core/error.hpp"
#include "fuzz_check.hpp"
#include "io/csv_reader.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  periodfit::io::CsvOptions options;
  switch (data[0] % 5) {
    case 0: break;                                   // detect everything
    case 1: options.rate_hz = 1000; break;           // --rate
    case 2: options.time_column = "none"; options.rate_hz = 48000; break;
    case 3: options.time_column = "0"; break;        // by position
    case 4: options.time_column = "t"; break;        // by name
  }
  try {
    const auto capture = periodfit::io::parse_csv(periodfit::fuzz::as_text(data + 1, size - 1),
                                                  "fuzz.csv", options);
    periodfit::fuzz::check_capture(capture);
  } catch (const periodfit::Error&) {
    // A clear, typed error is the correct answer to most inputs.
  }
  return 0;
}

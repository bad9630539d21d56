#pragma once
/// SHA-256 (FIPS 180-4) of bytes and of files, as 64 lower-case hex digits: the content hash of
/// a capture and of a config, which make a recorded result's identity (store/recorder.hpp).
#include <cstdint>
#include <string>
#include <string_view>

namespace periodfit::store {

class Sha256 {
 public:
  Sha256();
  void update(std::string_view bytes);
  /// The digest as hex; the object is spent afterwards.
  std::string hex();

 private:
  void block(const unsigned char* p);
  std::uint32_t h_[8];
  unsigned char buffer_[64];
  std::size_t buffered_ = 0;
  std::uint64_t length_ = 0;
};

std::string sha256_hex(std::string_view bytes);

/// SHA-256 of a file's bytes, read in chunks, and its size. Throws IoError when it cannot be read.
struct FileDigest {
  std::string sha256;
  std::uint64_t size = 0;
};
FileDigest sha256_file(const std::string& path);

}  // namespace periodfit::store

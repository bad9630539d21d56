#include "io/output_set.hpp"

#include <sys/stat.h>

#include <filesystem>
#include <memory>

#include "core/error.hpp"
#include "io/output_file.hpp"

namespace periodfit::io {

namespace {

/// What decides whether two paths are one file: device and inode when it exists (so a hard
/// link, `./x` and `x`, or a link to it all compare equal), else the absolute lexically normal
/// path after following symbolic links (two spellings of one new name).
struct FileKey {
  bool exists = false;
  dev_t device = 0;
  ino_t inode = 0;
  std::string normal;
  bool operator==(const FileKey& other) const {
    if (exists != other.exists) return false;
    return exists ? device == other.device && inode == other.inode : normal == other.normal;
  }
};

FileKey key_of(const std::string& path, const std::string& resolved) {
  FileKey key;
  struct stat info {};
  if (::stat(path.c_str(), &info) == 0) {
    key.exists = true;
    key.device = info.st_dev;
    key.inode = info.st_ino;
    return key;
  }
  std::error_code ec;
  std::filesystem::path absolute = std::filesystem::absolute(resolved, ec);
  if (ec) absolute = resolved;
  std::filesystem::path canonical = std::filesystem::weakly_canonical(absolute, ec);
  key.normal = (ec ? absolute : canonical).lexically_normal().string();
  return key;
}

}  // namespace

OutputSet::OutputSet(std::vector<Named> outputs, const std::vector<Named>& inputs) {
  std::vector<FileKey> keys;
  for (auto& [option, path] : outputs) {
    if (path.empty()) continue;
    const OutputTarget target = inspect_output(path);  // throws for what is never written
    const FileKey key = target.kind == OutputKind::standard_output ? FileKey{} : key_of(path, target.resolved);
    for (std::size_t i = 0; i < outputs_.size(); ++i) {
      const bool both_stdout = path == "-" && outputs_[i].path == "-";
      if (both_stdout)
        throw OptionError(option, path, outputs_[i].option + " already writes to standard output; only one output can");
      if (path != "-" && outputs_[i].path != "-" && key == keys[i])
        throw OptionError(option, path, "the same file as " + outputs_[i].option + "; each output needs its own path");
    }
    for (const auto& [input_name, input_path] : inputs) {
      if (input_path.empty() || input_path == "-" || path == "-") continue;
      if (key == key_of(input_path, input_path))
        throw OptionError(option, path, "the same file as the input " + input_name + "; an output never replaces an input");
    }
    keys.push_back(key);
    outputs_.push_back({option, path, {}, false});
  }
}

bool OutputSet::requested(std::string_view option) const {
  for (const auto& o : outputs_)
    if (o.option == option) return true;
  return false;
}

bool OutputSet::stdout_free() const {
  for (const auto& o : outputs_)
    if (o.path == "-") return false;
  return true;
}

void OutputSet::set(std::string_view option, std::string content) {
  for (auto& o : outputs_)
    if (o.option == option) {
      o.content = std::move(content);
      o.has_content = true;
      return;
    }
  throw Error("internal: output " + std::string(option) + " was not declared");
}

void OutputSet::publish(std::string_view text) {
  std::vector<std::unique_ptr<AtomicFile>> files;
  // Step 1: regular files into their temporaries. Devices and FIFOs are opened here too (a
  // FIFO's open waits for its reader) but written only in step 2.
  for (const auto& o : outputs_) {
    if (!o.has_content || o.path == "-") continue;
    files.push_back(std::make_unique<AtomicFile>(o.path));
    if (files.back()->kind() == OutputKind::replace) {
      files.back()->write(o.content);
      files.back()->finish();
    }
  }
  // Step 2: what cannot be taken back, last before the renames.
  std::size_t next = 0;
  for (const auto& o : outputs_) {
    if (!o.has_content || o.path == "-") continue;
    AtomicFile& file = *files[next++];
    if (file.kind() != OutputKind::in_place) continue;
    file.write(o.content);
    file.finish();
  }
  bool stdout_used = false;
  for (const auto& o : outputs_)
    if (o.has_content && o.path == "-") {
      write_stdout(o.content);
      stdout_used = true;
    }
  if (!stdout_used && !text.empty()) write_stdout(text);
  // Step 3: publish. A failure leaves the unpublished temporaries to their destructors.
  for (auto& file : files)
    if (file->kind() == OutputKind::replace) file->publish();
}

}  // namespace periodfit::io

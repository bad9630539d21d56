#pragma once
/// The outputs of one command, checked before any work and published together, so that exit
/// status 2 means no output was written (docs/robustness.md, issue 11 classes 2, 3 and 11).
///
/// Before the work (the constructor): refuses two outputs to standard output, two outputs that
/// are one file, an output that is one of the command's inputs (by device and inode when both
/// exist, else by the normalised path with symbolic links followed), and an output that can
/// never be written (a directory, a block device, a socket; io::inspect_output).
///
/// After the work (publish()), in three steps:
///   1. every output bound for a regular file is written to its temporary, flushed, fsynced
///      and closed: a failure (disk full, permission, a missing folder) removes every
///      temporary and nothing is published;
///   2. the streams that cannot be taken back are written: character devices and FIFOs in
///      place, then standard output (the "-" output, else the text result), each write and the
///      flush checked; a failure here leaves the temporaries unpublished (removed);
///   3. the temporaries are renamed over their destinations, one by one. A rename in a folder
///      where the temporary was just created fails only when the folder changes under the run
///      (removed, made read-only) or on an I/O error; the files renamed before it stay
///      published, the rest are removed, and the error names the one that failed. Standard
///      output has been written by then: that is the one case where exit status 2 follows some
///      output, and it is rare by construction.
///
/// Usage:
///   io::OutputSet outputs({{"--json", json_path}, {"--plot", plot_path}}, {{"FILE", file}});
///   … the work …
///   if (outputs.requested("--json")) outputs.set("--json", json_text);
///   outputs.publish(outputs.stdout_free() ? text : "");
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace periodfit::io {

class OutputSet {
 public:
  /// option (as named in messages) and path; an empty path is "not requested" and ignored.
  using Named = std::pair<std::string, std::string>;
  /// Throws OptionError (two outputs to one place, an output that is an input) or IoError /
  /// Error (an output that can never be written). Inputs named "-" (standard input) or ""
  /// are ignored.
  OutputSet(std::vector<Named> outputs, const std::vector<Named>& inputs);

  /// True when `option` names a requested output.
  bool requested(std::string_view option) const;
  /// True when no output goes to standard output, so it is free for the text result.
  bool stdout_free() const;
  /// The content of `option`'s output; an output never set is not written.
  void set(std::string_view option, std::string content);
  /// Writes every output that was set, then `text` to standard output when not empty (steps
  /// above). Throws IoError naming the output that failed. Call once.
  void publish(std::string_view text);

 private:
  struct Output {
    std::string option;
    std::string path;
    std::string content;
    bool has_content = false;
  };
  std::vector<Output> outputs_;
};

}  // namespace periodfit::io

// Every file the `earshot` tool writes goes through here (docs/cli.md,
// "Outputs"): the output is written to a temporary file in the target's own
// folder and renamed over the target only when complete, so a failed run
// leaves an existing file as it was and no partial or temporary file behind.
// Also the one overwrite policy (an existing output needs --force) and the one
// same-file check (device and inode, after following symlinks).
#pragma once
#include <sndfile.h>

#include <cstddef>
#include <string>
#include <utility>
#include <vector>

namespace earshot {
namespace cli {

class OutputFile {
 public:
  // Creates `target`'s temporary file beside it (mkstemp; mode 0666 & ~umask,
  // as a plain open would give). InputError "cannot write <what> '<target>'"
  // on failure; `what` names the kind of file ("audio file"), or is empty.
  explicit OutputFile(std::string target, const std::string& what = "");
  // Removes the temporary file unless commit() succeeded.
  ~OutputFile();
  OutputFile(const OutputFile&) = delete;
  OutputFile& operator=(const OutputFile&) = delete;

  const std::string& target() const { return target_; }

  // Appends bytes; InputError naming the target on failure.
  void write(const void* data, size_t n);
  void write(const std::string& text) { write(text.data(), text.size()); }

  // A libsndfile handle on the temporary file (closed by commit() or the
  // destructor). InputError naming the target when libsndfile refuses `info`.
  SNDFILE* sound(SF_INFO& info);

  // Closes the sound handle, flushes to disk (fsync), renames the temporary
  // file over the target and flushes the folder. InputError on failure, after
  // which the temporary file is gone and the target untouched.
  void commit();

 private:
  void discard();

  std::string target_, what_, temp_;
  int fd_ = -1;
  SNDFILE* snd_ = nullptr;
  bool committed_ = false;
};

// The overwrite policy: an existing `path` (anything, even a dangling symlink)
// is a UsageError naming it and asking for --force, unless `force`.
void check_overwrite(const std::string& path, bool force);

// True when both paths name one existing file: same device and inode after
// following symlinks (so hard links and symlinks are caught, not spellings).
bool same_file(const std::string& a, const std::string& b);

// UsageError "<out_label> '<out>' is the same file as <in_label> '<in>'" for the
// first input that is the same file as `out`. Refused even with --force.
// inputs: (label, path) pairs, e.g. {"IN", "in.wav"}.
void refuse_same_file(const std::string& out_label, const std::string& out,
                      const std::vector<std::pair<std::string, std::string>>& inputs);

}  // namespace cli
}  // namespace earshot

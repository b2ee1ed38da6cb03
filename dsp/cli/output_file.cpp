// The temporary-file-then-rename writer, the overwrite policy and the
// same-file check shared by every command (output_file.hpp).
#include "output_file.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstring>

#include "cli.hpp"

namespace earshot {
namespace cli {
namespace {

std::string folder_of(const std::string& path) {
  const size_t slash = path.find_last_of('/');
  if (slash == std::string::npos) return ".";
  return slash == 0 ? "/" : path.substr(0, slash);
}

// Flushes the folder entry of a rename to disk; best effort (some file
// systems refuse fsync on a folder).
void sync_folder(const std::string& dir) {
  const int d = ::open(dir.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (d < 0) return;
  ::fsync(d);
  ::close(d);
}

}  // namespace

OutputFile::OutputFile(std::string target, const std::string& what)
    : target_(std::move(target)), what_(what.empty() ? "'" : what + " '") {
  if (target_.empty()) throw UsageError("an output file name is empty");
  if (target_.back() == '/') throw InputError("cannot write " + what_ + target_ + "': it names a folder, not a file");
  struct stat st;
  if (::lstat(target_.c_str(), &st) == 0 && S_ISDIR(st.st_mode))
    throw InputError("cannot write " + what_ + target_ + "': a folder of that name is in the way");
  std::string tmpl = target_ + ".earshot-tmp-XXXXXX";
  std::vector<char> buf(tmpl.begin(), tmpl.end());
  buf.push_back('\0');
  fd_ = ::mkostemp(buf.data(), O_CLOEXEC);
  if (fd_ < 0)
    throw InputError("cannot write " + what_ + target_ + "': cannot create a temporary file in its folder '" +
                     folder_of(target_) + "': " + std::strerror(errno));
  temp_ = buf.data();
  // mkstemp makes 0600; the output gets what a plain open(0666) would give.
  const mode_t mask = ::umask(0);
  ::umask(mask);
  if (::fchmod(fd_, 0666 & ~mask) != 0) {
    const int err = errno;
    discard();
    throw InputError("cannot write " + what_ + target_ + "': " + std::strerror(err));
  }
}

OutputFile::~OutputFile() {
  if (!committed_) discard();
}

void OutputFile::discard() {
  if (snd_) sf_close(snd_);
  snd_ = nullptr;
  if (fd_ >= 0) ::close(fd_);
  fd_ = -1;
  if (!temp_.empty()) ::unlink(temp_.c_str());
  temp_.clear();
}

void OutputFile::write(const void* data, size_t n) {
  const char* p = static_cast<const char*>(data);
  while (n > 0) {
    const ssize_t put = ::write(fd_, p, n);
    if (put < 0 && errno == EINTR) continue;
    if (put <= 0) throw InputError("cannot write " + what_ + target_ + "': " + std::strerror(put < 0 ? errno : EIO));
    p += put;
    n -= size_t(put);
  }
}

SNDFILE* OutputFile::sound(SF_INFO& info) {
  snd_ = sf_open_fd(fd_, SFM_WRITE, &info, SF_FALSE);
  if (!snd_) throw InputError("cannot write " + what_ + target_ + "': " + sf_strerror(nullptr));
  return snd_;
}

void OutputFile::commit() {
  if (snd_) {
    const int rc = sf_close(snd_);
    snd_ = nullptr;
    if (rc != 0) throw InputError("cannot write " + what_ + target_ + "': " + sf_error_number(rc));
  }
  if (::fsync(fd_) != 0) throw InputError("cannot write " + what_ + target_ + "': " + std::strerror(errno));
  const int fd = fd_;
  fd_ = -1;
  if (::close(fd) != 0) throw InputError("cannot write " + what_ + target_ + "': " + std::strerror(errno));
  if (std::rename(temp_.c_str(), target_.c_str()) != 0)
    throw InputError("cannot write " + what_ + target_ + "': renaming its temporary file into place failed: " +
                     std::strerror(errno));
  committed_ = true;
  sync_folder(folder_of(target_));
}

void check_overwrite(const std::string& path, bool force) {
  struct stat st;
  if (force || ::lstat(path.c_str(), &st) != 0) return;
  throw UsageError("'" + path + "' exists; pass --force to replace it");
}

bool same_file(const std::string& a, const std::string& b) {
  struct stat sa, sb;
  return ::stat(a.c_str(), &sa) == 0 && ::stat(b.c_str(), &sb) == 0 && sa.st_dev == sb.st_dev &&
         sa.st_ino == sb.st_ino;
}

void refuse_same_file(const std::string& out_label, const std::string& out,
                      const std::vector<std::pair<std::string, std::string>>& inputs) {
  for (const auto& in : inputs)
    if (same_file(in.second, out))
      throw UsageError(out_label + " '" + out + "' is the same file as " + in.first + " '" + in.second +
                       "' (refused even with --force); choose another output");
}

}  // namespace cli
}  // namespace earshot

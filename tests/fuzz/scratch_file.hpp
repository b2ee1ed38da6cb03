// The CLI document readers take a path (until the bytes-level entry points of
// the shared JSON reader land), so the JSON harnesses write each input to one
// scratch file in a per-process folder under $TMPDIR and parse that.
#pragma once
#include <unistd.h>

#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>

namespace earshot_fuzz {

inline std::string scratch_dir() {
  static const std::string dir = [] {
    const char* t = std::getenv("TMPDIR");
    std::string d = std::string(t && *t ? t : "/tmp") + "/earshot-fuzz-" + std::to_string(getpid());
    std::string cmd = "mkdir -p '" + d + "'";
    if (std::system(cmd.c_str()) != 0) std::abort();
    return d;
  }();
  return dir;
}

// Writes data to scratch_dir()/name; returns its path.
inline std::string scratch_file(const char* name, const uint8_t* data, size_t size) {
  const std::string path = scratch_dir() + "/" + name;
  FILE* f = std::fopen(path.c_str(), "wb");
  if (!f || std::fwrite(data, 1, size, f) != size || std::fclose(f) != 0) std::abort();
  return path;
}

}  // namespace earshot_fuzz

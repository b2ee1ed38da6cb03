// The CLI document readers take a path, so the JSON harnesses write each input
// to one scratch file in a per-process folder under $TMPDIR and parse that.
// The folder and its files are removed when the process exits normally (a
// crash leaves them; libFuzzer keeps the crashing input as an artifact too).
#pragma once
#include <unistd.h>

#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

namespace earshot_fuzz {

// Both lists live on the heap and are never destroyed: remove_scratch runs
// from atexit, and a function-local static constructed after the atexit
// registration would already be destroyed by then (C++17 [basic.start.term]/3).
inline std::string& scratch_dir_name() {
  static std::string* const dir = new std::string;
  return *dir;
}

inline std::vector<std::string>& scratch_files() {
  static std::vector<std::string>* const files = new std::vector<std::string>;
  return *files;
}

inline void remove_scratch() {
  for (const std::string& f : scratch_files()) std::remove(f.c_str());
  if (!scratch_dir_name().empty()) rmdir(scratch_dir_name().c_str());
}

inline const std::string& scratch_dir() {
  static const bool made = [] {
    const char* t = std::getenv("TMPDIR");
    std::string pattern = std::string(t && *t ? t : "/tmp") + "/earshot-fuzz-XXXXXX";
    if (!mkdtemp(pattern.data())) std::abort();
    scratch_dir_name() = pattern;
    std::atexit(remove_scratch);
    return true;
  }();
  (void)made;
  return scratch_dir_name();
}

// Writes data to scratch_dir()/name; returns its path.
inline std::string scratch_file(const char* name, const uint8_t* data, size_t size) {
  const std::string path = scratch_dir() + "/" + name;
  bool known = false;
  for (const std::string& f : scratch_files()) known = known || f == path;
  if (!known) scratch_files().push_back(path);
  FILE* f = std::fopen(path.c_str(), "wb");
  if (!f || std::fwrite(data, 1, size, f) != size || std::fclose(f) != 0) std::abort();
  return path;
}

}  // namespace earshot_fuzz

// libFuzzer harness: the site config reader (`earshot site`, dsp/cli/site.cpp
// parse_config). A bad config must end in InputError naming the file; any
// other exception, a crash or a sanitizer report is a finding.
// The reader lives in the file's unnamed namespace, so the file is included.
#include "../../dsp/cli/site.cpp"

#include "scratch_file.hpp"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  const std::string path = earshot_fuzz::scratch_file("site.json", data, size);
  try {
    const earshot::cli::Config c = earshot::cli::parse_config(path);
    (void)c;
  } catch (const earshot::cli::InputError& e) {
    if (std::string(e.what()).find(path) == std::string::npos) __builtin_trap();  // the error names the file
  }
  return 0;
}

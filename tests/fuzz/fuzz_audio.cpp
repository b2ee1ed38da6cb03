// libFuzzer harness: the CLI's audio reader (read_audio, dsp/cli/common.cpp,
// libsndfile underneath), used by `earshot loudness`, `anchors` and the site
// builder's listening clips. A bad file must end in InputError; any other
// exception, a crash, a sanitizer report or memory beyond the documented
// sample limit (libFuzzer's -rss_limit_mb / -malloc_limit_mb) is a finding.
// libsndfile itself is not instrumented, so coverage counts our side only.
#include <cstdint>
#include <string>

#include "../../dsp/cli/cli.hpp"
#include "scratch_file.hpp"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  const std::string path = earshot_fuzz::scratch_file("input.audio", data, size);
  try {
    const earshot::cli::Audio a = earshot::cli::read_audio(path);
    // What the reader returns must be whole: frames x channels samples.
    if (a.samples.size() != a.frames * size_t(a.channels)) __builtin_trap();
  } catch (const earshot::cli::InputError&) {
  }
  return 0;
}

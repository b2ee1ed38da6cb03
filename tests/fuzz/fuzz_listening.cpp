// libFuzzer harness: the listening test definition reader (`earshot site`,
// dsp/cli/site_listening.cpp plan_listening), against the effects and clips of
// demos/site.json. A bad definition must end in InputError; any other
// exception, a crash or a sanitizer report is a finding.
#include <cstdint>
#include <string>
#include <vector>

#include "../../dsp/cli/cli.hpp"
#include "../../dsp/cli/site_listening.hpp"
#include "scratch_file.hpp"

using namespace earshot::cli;

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  static const std::vector<ListeningEffect> effects = {
      {"lstm", {{"drive", 0, 1}, {"tone", -1, 1}}},
      {"gru", {{"drive", 0, 1}, {"tone", -1, 1}}},
      {"wavenet", {{"drive", 0, 1}, {"tone", -1, 1}}},
      {"tcn", {{"drive", 0, 1}, {"tone", -1, 1}}},
  };
  static const std::vector<ListeningClip> clips = {
      {"clips/melody.wav", "clips/melody.wav"},
      {"clips/strum.wav", "clips/strum.wav"},
      {"clips/sweep.wav", "clips/sweep.wav"},
      {"clips/bursts.wav", "clips/bursts.wav"},
  };
  const std::string path = earshot_fuzz::scratch_file("listening.json", data, size);
  try {
    const ListeningPlan p = plan_listening(path, effects, clips);
    (void)p;
  } catch (const InputError&) {
  }
  return 0;
}

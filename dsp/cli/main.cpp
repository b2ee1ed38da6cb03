// `earshot`: the native command-line tool. Dispatches to one command per file
// (info.cpp, render.cpp, bench.cpp, verify.cpp) and turns every failure into a
// message on stderr and a documented exit code.
#include <cstdio>
#include <exception>
#include <new>
#include <string>
#include <vector>

#include "cli.hpp"
#include "text_out.hpp"

#ifndef EARSHOT_VERSION
#define EARSHOT_VERSION "0.1.0"
#endif

namespace {

const char* kUsage =
    "earshot " EARSHOT_VERSION " - run trained neural audio effects (.nfx effect files)\n"
    "\n"
    "usage: earshot COMMAND [ARGUMENTS] [OPTIONS]\n"
    "\n"
    "commands:\n"
    "  info FILE            describe an effect: layers, parameters, cost, controls, credits\n"
    "  render FILE IN OUT   run an audio file (WAV, FLAC, AIFF; mono or stereo) through an effect\n"
    "  bench FILE           speed of every CPU variant, against its measured peak multiply-add rate\n"
    "  verify FILE          check that the CPU variants give bit-identical output on a test signal\n"
    "  site CONFIG --out DIR  build the static demo site (page, WebAssembly, effects, self-check data)\n"
    "  loudness FILE...     integrated loudness (ITU-R BS.1770-4) of audio files; --match writes a matched copy\n"
    "  anchors REF... --out DIR  the MUSHRA anchors (3.5 and 7 kHz low-pass) of reference clips\n"
    "  tally RESULTS...     statistics of listening-test results files (MUSHRA, ABX, A/B)\n"
    "\n"
    "options:\n"
    "  -h, --help           this text; 'earshot COMMAND --help' describes a command\n"
    "  --version            print the version\n"
    "\n"
    "exit codes: 0 success, 1 a verify check failed, 2 bad command line,\n"
    "            3 unreadable or invalid effect or audio file, or a write failure\n";

}  // namespace

int earshot_cmd_site(int argc, char** argv);  // site.cpp; argv[0] is "site"
int earshot_cmd_loudness(int argc, char** argv);  // loudness.cpp; argv[0] is "loudness"
int earshot_cmd_anchors(int argc, char** argv);   // loudness.cpp; argv[0] is "anchors"
int earshot_cmd_tally(int argc, char** argv);     // tally.cpp; argv[0] is "tally"

int main(int argc, char** argv) {
  using namespace earshot::cli;
  std::vector<std::string> args(argv + 1, argv + argc);
  if (args.empty()) {
    std::fputs(kUsage, stderr);
    return kExitUsage;
  }
  const std::string cmd = args[0];
  if (cmd == "-h" || cmd == "--help" || cmd == "help") {
    if (cmd == "help" && args.size() > 1) {
      args = {args[1], "--help"};
    } else {
      std::fputs(kUsage, stdout);
      return kExitOk;
    }
  }
  if (cmd == "--version") {
    std::printf("earshot %s\n", EARSHOT_VERSION);
    return kExitOk;
  }
  const std::string name = args[0];
  const std::vector<std::string> rest(args.begin() + 1, args.end());
  int (*run)(const std::vector<std::string>&) = nullptr;
  if (name == "info") run = cmd_info;
  if (name == "render") run = cmd_render;
  if (name == "bench") run = cmd_bench;
  if (name == "verify") run = cmd_verify;
  if (name == "site") {
    std::vector<char*> site_argv;
    for (std::string& t : args) site_argv.push_back(&t[0]);
    return earshot_cmd_site(int(site_argv.size()), site_argv.data());
  }
  if (name == "loudness" || name == "anchors" || name == "tally") {
    std::vector<char*> cmd_argv;
    for (std::string& t : args) cmd_argv.push_back(&t[0]);
    const int n = int(cmd_argv.size());
    if (name == "loudness") return earshot_cmd_loudness(n, cmd_argv.data());
    if (name == "anchors") return earshot_cmd_anchors(n, cmd_argv.data());
    return earshot_cmd_tally(n, cmd_argv.data());
  }
  if (!run) {
    if (!name.empty() && name[0] == '-')
      std::fprintf(stderr, "earshot: unknown option '%s' (a command comes first: info, render, bench, verify, site, loudness, anchors, tally)\n",
                   name.c_str());
    else
      std::fprintf(stderr, "earshot: unknown command '%s' (commands: info, render, bench, verify, site, loudness, anchors, tally)\n", name.c_str());
    std::fputs("Run 'earshot --help' for usage.\n", stderr);
    return kExitUsage;
  }
  try {
    const int rc = run(rest);
    if (std::fflush(stdout) != 0) {
      std::fprintf(stderr, "earshot %s: cannot write to standard output\n", name.c_str());
      return kExitInput;
    }
    return rc;
  } catch (const UsageError& e) {
    std::fflush(stdout);
    std::fprintf(stderr, "earshot %s: %s\nRun 'earshot %s --help' for usage.\n", name.c_str(), terminal_lines(e.what()).c_str(),
                 name.c_str());
    return kExitUsage;
  } catch (const InputError& e) {
    std::fflush(stdout);
    std::fprintf(stderr, "earshot %s: %s\n", name.c_str(), terminal_lines(e.what()).c_str());
    return kExitInput;
  } catch (const std::bad_alloc&) {
    std::fprintf(stderr, "earshot %s: out of memory\n", name.c_str());
    return kExitInput;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "earshot %s: internal error: %s\n", name.c_str(), terminal_lines(e.what()).c_str());
    return kExitInput;
  }
}

// `earshot`: the native command-line tool. One table names every command
// (info, render, bench, verify, site, loudness, anchors, tally: one file each,
// loudness.cpp holding two), its synopsis and summary for `earshot --help`,
// and the function that runs it; one guarded runner turns every failure into
// a message on stderr and a documented exit code (docs/cli.md, "Exit codes").
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

using namespace earshot::cli;

struct Command {
  const char* name;
  const char* arguments;  // shown after the name in `earshot --help`
  const char* summary;
  int (*run)(const std::vector<std::string>& args);  // the arguments after the command word
};

const Command kCommands[] = {
    {"info", "FILE", "describe an effect: layers, parameters, cost, controls, credits", cmd_info},
    {"render", "FILE IN OUT", "run an audio file (WAV, FLAC, AIFF; mono or stereo) through an effect", cmd_render},
    {"bench", "FILE", "speed of every CPU variant, against its measured peak multiply-add rate", cmd_bench},
    {"verify", "FILE", "check that the CPU variants give bit-identical output on a test signal", cmd_verify},
    {"site", "CONFIG --out DIR", "build the static demo site (page, WebAssembly, effects, self-check data)", cmd_site},
    {"loudness", "FILE...",
     "integrated loudness (ITU-R BS.1770-4) of audio files; --match writes a matched copy", cmd_loudness},
    {"anchors", "REF... --out DIR", "the MUSHRA anchors (3.5 and 7 kHz low-pass) of reference clips", cmd_anchors},
    {"tally", "RESULTS...", "statistics of listening-test results files (MUSHRA, ABX, A/B)", cmd_tally},
};

std::string command_names() {
  std::string s;
  for (const Command& c : kCommands) s += (s.empty() ? "" : ", ") + std::string(c.name);
  return s;
}

std::string usage() {
  std::string s =
      "earshot " EARSHOT_VERSION " - run trained neural audio effects (.nfx effect files)\n"
      "\n"
      "usage: earshot COMMAND [ARGUMENTS] [OPTIONS]\n"
      "\n"
      "commands:\n";
  for (const Command& c : kCommands) {
    const std::string head = std::string(c.name) + " " + c.arguments;
    s += "  " + head + std::string(head.size() + 2 > 21 ? 2 : 21 - head.size(), ' ') + c.summary + "\n";
  }
  return s +
         "\n"
         "options:\n"
         "  -h, --help           this text; 'earshot COMMAND --help' describes a command\n"
         "  --version            print the version\n"
         "\n"
         "exit codes: 0 success, 1 a verify check failed, 2 bad command line,\n"
         "            3 unreadable or invalid effect or audio file, or a write failure\n";
}

// Runs one command; every failure becomes "earshot NAME: message" on stderr
// and its exit code. Standard output is flushed (and checked) before a
// message, so a report and its error appear in order.
int run_guarded(const Command& c, const std::vector<std::string>& args) {
  const char* name = c.name;
  try {
    const int rc = c.run(args);
    if (std::fflush(stdout) != 0) {
      std::fprintf(stderr, "earshot %s: cannot write to standard output\n", name);
      return kExitInput;
    }
    return rc;
  } catch (const UsageError& e) {
    std::fflush(stdout);
    std::fprintf(stderr, "earshot %s: %s\nRun 'earshot %s --help' for usage.\n", name, terminal_lines(e.what()).c_str(),
                 name);
    return kExitUsage;
  } catch (const InputError& e) {
    std::fflush(stdout);
    std::fprintf(stderr, "earshot %s: %s\n", name, terminal_lines(e.what()).c_str());
    return kExitInput;
  } catch (const std::bad_alloc&) {
    std::fprintf(stderr, "earshot %s: out of memory\n", name);
    return kExitInput;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "earshot %s: internal error: %s\n", name, terminal_lines(e.what()).c_str());
    return kExitInput;
  }
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::string> args(argv + 1, argv + argc);
  if (args.empty()) {
    std::fputs(usage().c_str(), stderr);
    return kExitUsage;
  }
  const std::string first = args[0];
  if (first == "-h" || first == "--help" || (first == "help" && args.size() == 1)) {
    std::fputs(usage().c_str(), stdout);
    return kExitOk;
  }
  if (first == "help") args = {args[1], "--help"};  // `earshot help COMMAND`
  if (first == "--version") {
    std::printf("earshot %s\n", EARSHOT_VERSION);
    return kExitOk;
  }
  const std::string& name = args[0];
  for (const Command& c : kCommands)
    if (name == c.name) return run_guarded(c, std::vector<std::string>(args.begin() + 1, args.end()));
  if (!name.empty() && name[0] == '-')
    std::fprintf(stderr, "earshot: unknown option '%s' (a command comes first: %s)\n", terminal_text(name).c_str(),
                 command_names().c_str());
  else
    std::fprintf(stderr, "earshot: unknown command '%s' (commands: %s)\n", terminal_text(name).c_str(),
                 command_names().c_str());
  std::fputs("Run 'earshot --help' for usage.\n", stderr);
  return kExitUsage;
}

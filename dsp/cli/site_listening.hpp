// The listening test definition of a site (docs/listening.md): `earshot site`
// checks it against the effects and clips the site bundles, reads every audio
// file it names, and plans what to copy. Paths in the definition are relative
// to its own folder; in the site, a file that is one of the bundled clips is
// named by the clip's site path, any other goes to listening/.
#pragma once
#include <filesystem>
#include <string>
#include <utility>
#include <vector>

namespace earshot {
namespace cli {

struct ListeningControl {
  std::string name;
  double min = 0, max = 0;
};

struct ListeningEffect {
  std::string id;
  std::vector<ListeningControl> controls;
};

// A clip the site bundles: its source file and its path in the site.
struct ListeningClip {
  std::filesystem::path source;
  std::string site_file;
};

struct ListeningPlan {
  std::string json;  // listening.json as the site gets it: the definition with site paths
  std::vector<std::pair<std::filesystem::path, std::string>> copies;  // source -> path in the site
  std::string title;
  struct Test {
    std::string id, type, title;
  };
  std::vector<Test> tests;
};

// Throws InputError "<definition>: <field>: <what is wrong>" for any fault.
ListeningPlan plan_listening(const std::filesystem::path& definition, const std::vector<ListeningEffect>& effects,
                             const std::vector<ListeningClip>& clips);

}  // namespace cli
}  // namespace earshot

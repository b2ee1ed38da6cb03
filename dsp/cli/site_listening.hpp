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
// Every audio path must resolve (after symlinks) inside one of `roots`, the
// site config's folder and any --allow-root folder, all already resolved
// (default: the definition's own folder).
ListeningPlan plan_listening(const std::filesystem::path& definition, const std::vector<ListeningEffect>& effects,
                             const std::vector<ListeningClip>& clips,
                             const std::vector<std::filesystem::path>& roots = {});

// The confinement rule of the site builder (docs/site.md): `rel`, relative to
// `base`, must not be absolute and must resolve (realpath, after symlinks)
// inside one of `roots` (resolved folders; roots[0] is the config's folder).
// Returns the resolved path; throws InputError "<file>: <field>: ..." naming
// the resolved path otherwise. A path that does not exist yet is resolved as
// far as it exists.
std::filesystem::path confine(const std::string& file, const std::string& field,
                              const std::vector<std::filesystem::path>& roots, const std::filesystem::path& base,
                              const std::string& rel);

// Whether the resolved path `inner` is `outer` or lies inside it (whole components).
bool path_within(const std::filesystem::path& inner, const std::filesystem::path& outer);

}  // namespace cli
}  // namespace earshot

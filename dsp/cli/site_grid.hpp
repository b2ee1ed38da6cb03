// The comparison grid of a site (docs/site.md, "The comparison grid"): rows
// are bundled clips, columns are conditions (the dry input, the clip's
// reference file, or an effect at given control settings). `earshot site`
// checks the grid against the effects and clips, renders every cell natively
// and writes each cell's hash into site.json, so the page can show, cell by
// cell, whether the browser computed the same samples.
#pragma once
#include <cstdint>
#include <filesystem>
#include <string>
#include <utility>
#include <vector>

#include "cli.hpp"  // configures rapidjson
#include "json_fields.hpp"

#include <rapidjson/prettywriter.h>
#include <rapidjson/stringbuffer.h>

namespace earshot {
namespace cli {

// Limits of a grid (each refused with the field named).
constexpr size_t kGridMaxColumns = 16;
constexpr size_t kGridMaxRows = 64;
// Seconds of audio the builder renders for the effect cells together: the
// native render of every cell is what makes each cell checkable, and a config
// must not make the builder run for hours.
constexpr double kGridMaxRenderSeconds = 3600.0;

struct GridColumn {
  std::string field;  // "grid.columns[2]"
  std::string name, description;
  std::string kind;    // "input", "reference" or "effect"
  std::string effect;  // the effect's id (kind "effect")
  std::vector<std::pair<std::string, double>> controls;  // as the config gives them
};

// The grid as the config declares it (structure and types only; the effects
// and clips it names are checked by plan_grid).
struct GridSpec {
  bool present = false;
  std::string title, description;
  std::vector<std::string> rows;  // clip ids; empty = every clip
  std::vector<GridColumn> columns;
};

// "grid" of the site config; InputError naming the field for any fault.
GridSpec parse_grid(const Where& w, const rapidjson::Value& grid);

// What plan_grid needs of each effect and clip of the site.
struct GridEffect {
  std::string id, field, path;
  const std::vector<unsigned char>* bytes = nullptr;
  struct Control {
    std::string name;
    double min = 0, max = 0, value = 0;  // value: the page default (config, else the file's)
  };
  std::vector<Control> controls;
};

struct GridClip {
  std::string id, field;
  std::filesystem::path file, reference;  // reference empty when the clip has none
  double seconds = 0;
};

struct GridCell {
  bool available = false;  // false: a reference column on a clip without reference
  uint64_t hash = 0;       // FNV-1a 64 of the cell's float32 samples, channel after channel
  int64_t frames = 0;
  int channels = 0;
};

struct GridPlan {
  GridSpec spec;
  std::vector<size_t> rows;  // index into the clips
  std::vector<std::vector<std::pair<std::string, double>>> column_controls;  // effect columns: every control
  std::vector<size_t> column_effect;  // index into the effects (effect columns)
  std::vector<std::vector<GridCell>> cells;  // [row][column]
  double rendered_seconds = 0;
};

// Checks the grid against the site's effects and clips and computes every
// cell natively: the input and reference as libsndfile reads them, an effect
// cell as `earshot render CLIP --control ...` writes it (one stream per
// channel at the clip's rate, mix 1, gains 0 dB, latency trimmed; native
// scalar variant, which every variant and both WebAssembly builds match bit
// for bit). Throws InputError naming the config field.
GridPlan plan_grid(const GridSpec& spec, const std::vector<GridEffect>& effects, const std::vector<GridClip>& clips,
                   const Where& where);

// The "grid" member of site.json.
void write_grid(rapidjson::PrettyWriter<rapidjson::StringBuffer>& w, const GridPlan& plan,
                const std::vector<GridEffect>& effects, const std::vector<GridClip>& clips);

}  // namespace cli
}  // namespace earshot

// The table of layer types: one row per type, in the order of the LayerType
// enum (model.hpp). X(type, Name):
//   type  the name in effect files ("type": "gru") and the enum value;
//   Name  the stem of the type's two parts in dsp/layers/<type>.hpp:
//         Name##Type, its fields, figures, stream memory and display
//         (types.hpp lists what it provides), and Name##Layer<Arch>, its
//         per-variant kernel, built by GraphRunner (variant_graph.cpp).
// The enum, the type names, the loader's dispatch and its "unknown layer
// type" list, the stream-memory bound, the info JSON, `earshot info`'s detail
// column and GraphRunner's construction all come from this table.
//
// Adding a type: its file dsp/layers/<type>.hpp, one row below and one
// #include at the end of this file (DEVELOPERS.md, "Adding a layer type").
#ifndef EARSHOT_LAYER_TABLE
#define EARSHOT_LAYER_TABLE

#define EARSHOT_LAYER_TYPES(X) \
  X(linear, Linear)            \
  X(conv1d, Conv1d)            \
  X(lstm, Lstm)                \
  X(gru, Gru)                  \
  X(activation, Activation)    \
  X(gated, Gated)              \
  X(film, Film)                \
  X(wavenet, Wavenet)          \
  X(tcn, Tcn)

#endif  // EARSHOT_LAYER_TABLE

// The types' files: their description parts when included by types.hpp,
// their kernels when included by variant_graph.cpp (EARSHOT_LAYER_KERNELS).
#if defined(EARSHOT_LAYER_DESCRIPTIONS) || defined(EARSHOT_LAYER_KERNELS)
#include "linear.hpp"
#include "conv1d.hpp"
#include "lstm.hpp"
#include "gru.hpp"
#include "activation.hpp"
#include "gated.hpp"
#include "film.hpp"
#include "wavenet.hpp"
#include "tcn.hpp"
#endif

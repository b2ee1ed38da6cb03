// The table of layer types: one row per type, in the order of the LayerType
// enum (model.hpp). X(type, Kernel):
//   type    the name in effect files ("type": "gru") and the enum value;
//   Kernel  the per-variant kernel template in dsp/layers/<type>.hpp,
//           Kernel<Arch>(const LayerSpec&), built by GraphRunner.
// The enum, the type names (messages, `earshot info`, the stream-memory
// refusal), the list in the loader's "unknown layer type" message and
// GraphRunner's dispatch all come from this table.
#pragma once

#define EARSHOT_LAYER_TYPES(X)    \
  X(linear, LinearLayer)          \
  X(conv1d, Conv1dLayer)          \
  X(lstm, LstmLayer)              \
  X(gru, GruLayer)                \
  X(activation, ActivationLayer)  \
  X(gated, GatedLayer)            \
  X(film, FilmLayer)              \
  X(wavenet, WavenetLayer)        \
  X(tcn, TcnLayer)

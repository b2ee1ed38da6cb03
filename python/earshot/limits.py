"""The core loader's limits (dsp/core/model.hpp, documented in dsp/FORMAT.md).

One table, names as in model.hpp; tests/python/test_corpus.py parses
model.hpp and asserts every entry here equals the C++ constant, so the
exporter and the Python loader cannot drift from the core silently.
"""

LIMITS = {
    "kMaxFileBytes": 256 << 20,
    "kMaxHeaderBytes": 16 << 20,
    "kMaxDim": 65536,
    "kMaxChannels": 1024,
    "kMaxKernel": 64,
    "kMaxDilation": 65536,
    "kMaxLayers": 256,
    "kMaxControls": 16,
    "kMaxRecurrentLayers": 8,
    "kMaxWavenetLayers": 64,
    "kMaxFilmHidden": 4,
    "kMaxParameters": 16777216,
    "kMaxReceptiveField": 1 << 20,
}

MAX_FILE_BYTES = LIMITS["kMaxFileBytes"]
MAX_HEADER_BYTES = LIMITS["kMaxHeaderBytes"]
MAX_DIM = LIMITS["kMaxDim"]
MAX_CHANNELS = LIMITS["kMaxChannels"]
MAX_KERNEL = LIMITS["kMaxKernel"]
MAX_DILATION = LIMITS["kMaxDilation"]
MAX_LAYERS = LIMITS["kMaxLayers"]
MAX_CONTROLS = LIMITS["kMaxControls"]
MAX_RECURRENT_LAYERS = LIMITS["kMaxRecurrentLayers"]
MAX_WAVENET_LAYERS = LIMITS["kMaxWavenetLayers"]
MAX_FILM_HIDDEN = LIMITS["kMaxFilmHidden"]
MAX_PARAMETERS = LIMITS["kMaxParameters"]
MAX_RECEPTIVE_FIELD = LIMITS["kMaxReceptiveField"]

# Sample rates (whole Hz) of the C ABI, EARSHOT_MIN_RATE and EARSHOT_MAX_RATE of
# dsp/include/earshot/earshot.h (test_corpus.py checks them against it); an
# effect file's sample_rate obeys the same range.
MIN_RATE = 8000
MAX_RATE = 384000

/* earshot C ABI: the one door to the inference core.
 *
 * The native CLI, the tests and both WebAssembly builds reach the core only
 * through these functions. Nothing here throws; every failure is a return
 * value, and a failure never disturbs a stream that is already running.
 *
 * A stream owns everything it needs, allocated in earshot_create; after that,
 * earshot_process never allocates, locks, throws or makes a system call.
 * Not thread-safe per stream: call one stream from one thread at a time.
 */
#ifndef EARSHOT_EARSHOT_H
#define EARSHOT_EARSHOT_H

#include <stddef.h>

#ifdef __cplusplus
extern "C" {
#endif

typedef struct earshot_stream earshot_stream;

/* Status codes returned by the setters (0 = success). */
#define EARSHOT_OK 0
#define EARSHOT_ERR_ARGUMENT -1     /* null handle or pointer, or a bad size */
#define EARSHOT_ERR_INDEX -2        /* control index out of range */
#define EARSHOT_ERR_NOT_FINITE -3   /* value is NaN or infinite */
#define EARSHOT_ERR_RANGE -4        /* value outside the allowed range */

#define EARSHOT_MAX_BLOCK 65536

/* Sample rates (whole Hz) that streams, the loudness meter and the anchors
 * accept; the effect file's sample_rate obeys the same range. */
#define EARSHOT_MIN_RATE 8000
#define EARSHOT_MAX_RATE 384000

/* Loads an effect file from memory and makes a stream for audio at host_rate
 * (Hz; the core resamples when it differs from the model's rate).
 * variant: NULL or "" for the best this machine supports, else one of
 * "scalar", "sse4", "avx2", "avx2fma" (native) or the build's own ("simd",
 * "scalar") in WebAssembly.
 * On failure returns NULL and writes a message naming the fault into
 * error[0 .. error_cap-1] (always NUL-terminated when error_cap > 0). */
earshot_stream* earshot_create(const unsigned char* bytes, size_t len, double host_rate,
                               const char* variant, char* error, size_t error_cap);

/* Memory one stream may use by default: 64 MiB. Before allocating anything
 * large, earshot_create computes an upper bound on the bytes the stream will
 * hold at host_rate (the weights, every layer's state, convolution history and
 * scratch, the resampler; dsp/FORMAT.md, "Stream memory") and refuses a file
 * above the limit, naming the layer and the figures. A refused file costs a
 * parse of its header and description, never the allocation it asks for. */
#define EARSHOT_STREAM_BYTES_DEFAULT ((size_t)64 << 20)

/* earshot_create with an explicit limit instead of the default (a caller that
 * trusts the file may raise it; the bound is the same). */
earshot_stream* earshot_create_bounded(const unsigned char* bytes, size_t len, double host_rate,
                                       const char* variant, size_t max_stream_bytes, char* error,
                                       size_t error_cap);

/* The stream's memory bound in bytes, as checked against the limit at create
 * (also in earshot_info as "stream_bytes"). 0 for a null handle. */
size_t earshot_stream_bytes(const earshot_stream* s);

/* Processes n mono samples (1 <= n <= EARSHOT_MAX_BLOCK); in and out may alias.
 * Returns n, or 0 when an argument is bad or the stream has more than one
 * channel (then out is left untouched). */
int earshot_process(earshot_stream* s, const float* in, float* out, int n);

/* ---- Several channels in lockstep ----
 * A stream of `channels` channels of one effect (stereo left and right, or
 * several clips through the same settings). The channels share the controls,
 * mix and gains and run together: the recurrent layers load each weight once
 * for every channel. Each channel's output is bit-identical to a mono stream
 * with the same settings fed that channel alone, for as long as the output is
 * finite (a non-finite value in any channel silences every channel of that
 * call and resets the whole stream; it counts once). */
#define EARSHOT_MAX_CHANNELS 8

/* earshot_create_bounded for 1 .. EARSHOT_MAX_CHANNELS channels.
 * max_stream_bytes bounds the whole stream; 0 means channels times
 * EARSHOT_STREAM_BYTES_DEFAULT. A bad channel count is refused with a message. */
earshot_stream* earshot_create_channels(const unsigned char* bytes, size_t len, double host_rate, const char* variant, int channels, size_t max_stream_bytes, char* error, size_t error_cap);

/* The stream's channel count (1 for earshot_create); 0 for a null handle. */
int earshot_channels(const earshot_stream* s);

/* Processes n frames of every channel, planar: in[c][0..n) to out[c][0..n)
 * for c < earshot_channels(s) (1 <= n <= EARSHOT_MAX_BLOCK); in[c] may be
 * out[c]. Returns n, or 0 when an argument is bad (then nothing is written). */
int earshot_process_channels(earshot_stream* s, const float* const* in, float* const* out, int n);

/* Controls, by index in declaration order. A new value ramps linearly over the
 * control's smoothing time. Out-of-range and non-finite values are refused. */
int earshot_control_count(const earshot_stream* s);
int earshot_control_index(const earshot_stream* s, const char* name); /* -1 if none */
int earshot_set_control(earshot_stream* s, int index, float value);
float earshot_get_control(const earshot_stream* s, int index); /* target value */

/* Dry/wet (0 = dry only, 1 = wet only) and gains in dB (-60 .. +24); smoothed.
 * The dry path is delayed by the stream latency so the two line up. */
int earshot_set_mix(earshot_stream* s, float wet);
int earshot_set_gain(earshot_stream* s, float input_db, float output_db);

/* Clears all state (recurrent, convolution history, resampler, smoothers jump
 * to their targets). */
void earshot_reset(earshot_stream* s);

/* Latency in host-rate samples (resampler; the graph itself adds none). */
int earshot_latency(const earshot_stream* s);

/* JSON description: the effect's metadata plus computed figures and the
 * variant in use. Owned by the stream, valid until earshot_destroy. */
const char* earshot_info(const earshot_stream* s);

/* Name of the variant in use. Static storage. */
const char* earshot_variant(const earshot_stream* s);

/* How many blocks produced a non-finite value (each was replaced by silence
 * and the state was reset). */
unsigned earshot_nonfinite_count(const earshot_stream* s);

/* Text for a status code. Static storage. */
const char* earshot_status_text(int status);

void earshot_destroy(earshot_stream* s);

/* ---- Listening tests: loudness (ITU-R BS.1770-4) and MUSHRA anchors ----
 * Whole-clip functions for preparing stimuli (not for the audio thread: they
 * may take a while on long clips, and earshot_anchor allocates). Audio is
 * interleaved float, frames x channels; rate is a whole number of Hz from
 * EARSHOT_MIN_RATE to EARSHOT_MAX_RATE. Results are bit-identical natively and in WebAssembly (no
 * libm on the computation path). docs/listening.md describes them. */

/* Integrated loudness in LKFS (= LUFS) of a clip: K-weighting, 400 ms blocks
 * with 75 % overlap, absolute gate -70 LKFS, relative gate -10 LU.
 * weights: NULL for the default layout by channel count (1-3 channels: all
 * 1.0; 4: L R Ls Rs; 5: L R C Ls Rs; 6: L R C LFE Ls Rs, LFE not counted;
 * surround channels weigh 1.41), else one weight per channel (0 .. 10).
 * On success writes *lkfs: the loudness, or -infinity when no block passes
 * the absolute gate (silence, or a clip shorter than 400 ms).
 * Returns EARSHOT_OK, EARSHOT_ERR_ARGUMENT (null pointer, channels outside
 * 1..32, or more than 6 channels without weights), EARSHOT_ERR_NOT_FINITE
 * (a sample, weight or the rate is NaN or infinite) or EARSHOT_ERR_RANGE
 * (rate or a weight out of range). */
int earshot_loudness(const float* interleaved, size_t frames, int channels, double rate,
                     const double* weights, double* lkfs);

/* The same with the default weights; returns NaN on any error. */
double earshot_loudness_lkfs(const float* interleaved, size_t frames, int channels, double rate);

/* Scales the clip in place so that it measures target_lkfs (-70 .. 0): every
 * sample is multiplied by one float gain 10^((target - L)/20). Writes the
 * gain in dB to *gain_db (may be NULL). Returns the codes of
 * earshot_loudness, plus EARSHOT_ERR_RANGE for a target out of range or a
 * silent clip (no block above the absolute gate; left untouched). The result
 * may exceed full scale: check peaks if that matters. */
int earshot_loudness_match(float* interleaved, size_t frames, int channels, double rate,
                           const double* weights, double target_lkfs, double* gain_db);

/* MUSHRA anchor filter (ITU-R BS.1534-3): linear-phase low-pass FIR whose
 * pass band ends at passband_hz (3500 for the low anchor, 7000 for the mid
 * anchor; 1000 .. 20000 with 9/7 * passband_hz <= rate/2), odd length,
 * DC gain 1. With taps == NULL returns the number of taps; otherwise writes
 * them (capacity >= that number) and returns the number. Returns a negative
 * status code (EARSHOT_ERR_*) on bad arguments. */
int earshot_anchor_taps(double rate, double passband_hz, double* taps, int capacity);

/* Writes the anchor of an interleaved clip: every channel through the
 * earshot_anchor_taps filter, centred, so out has the clip's length and is
 * time-aligned with it (zero delay; the clip is taken as silent outside its
 * ends). in and out may be the same buffer. Returns EARSHOT_OK or an
 * EARSHOT_ERR_* code (then out is untouched). */
int earshot_anchor(const float* in, float* out, size_t frames, int channels, double rate, double passband_hz);

#ifdef __cplusplus
}
#endif

#endif /* EARSHOT_EARSHOT_H */

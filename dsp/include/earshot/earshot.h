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

/* Loads an effect file from memory and makes a stream for audio at host_rate
 * (Hz; the core resamples when it differs from the model's rate).
 * variant: NULL or "" for the best this machine supports, else one of
 * "scalar", "sse4", "avx2", "avx2fma" (native) or the build's own ("simd",
 * "scalar") in WebAssembly.
 * On failure returns NULL and writes a message naming the fault into
 * error[0 .. error_cap-1] (always NUL-terminated when error_cap > 0). */
earshot_stream* earshot_create(const unsigned char* bytes, size_t len, double host_rate,
                               const char* variant, char* error, size_t error_cap);

/* Processes n mono samples (1 <= n <= EARSHOT_MAX_BLOCK); in and out may alias.
 * Returns n, or 0 when an argument is bad (then out is left untouched). */
int earshot_process(earshot_stream* s, const float* in, float* out, int n);

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

#ifdef __cplusplus
}
#endif

#endif /* EARSHOT_EARSHOT_H */

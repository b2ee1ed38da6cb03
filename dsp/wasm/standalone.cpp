// The two services a standalone WebAssembly module would otherwise import
// from its host, defined here so earshot-simd.wasm and earshot-scalar.wasm
// have no imports at all (cmake/wasm.cmake; checked by tests/node/exports.test.mjs).
//
// - __wasi_proc_exit: Emscripten's standalone abort() ends in it. The core
//   reaches abort() only when an allocation fails (operator new without
//   exceptions) or libc++ meets an impossible length. Here it traps, so the
//   JS caller gets a WebAssembly.RuntimeError instead of needing a WASI host;
//   worklet/loader.js turns that into an Error and refuses further use of the
//   instance, whose memory may then be inconsistent.
// - emscripten_notify_memory_growth: called after memory.grow so a host can
//   refresh its typed-array views. worklet/loader.js re-derives its views
//   whenever memory.buffer changes, so nothing needs to happen here.
#include <stddef.h>

extern "C" {

[[noreturn]] void __wasi_proc_exit(unsigned code) {
  (void)code;
  __builtin_trap();
}

void emscripten_notify_memory_growth(size_t memory_index) { (void)memory_index; }

}  // extern "C"

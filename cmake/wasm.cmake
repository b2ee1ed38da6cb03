# WebAssembly build (Emscripten, included from CMakeLists.txt when EMSCRIPTEN).
#
# One build folder makes one standalone module, earshot-<variant>.wasm, with
# no JS glue and no imports. It exports exactly the C ABI of
# dsp/include/earshot/earshot.h plus malloc, free, memory and _initialize
# (run the static constructors once after instantiating; worklet/loader.js
# does). Presets: wasm-simd and wasm-scalar (CMakePresets.json); see docs/wasm.md.
#
#   simd    variant_graph.cpp with xsimd's sse4_1 arch under Emscripten's SSE
#           emulation (-msimd128 -msse4.1): every batch op is a wasm SIMD op
#   scalar  variant_graph.cpp with plain floats and no -msimd128 anywhere, for
#           engines without WebAssembly SIMD

set(EARSHOT_WASM_VARIANT simd CACHE STRING "WebAssembly variant to build: simd or scalar")
set_property(CACHE EARSHOT_WASM_VARIANT PROPERTY STRINGS simd scalar)
if(NOT EARSHOT_WASM_VARIANT MATCHES "^(simd|scalar)$")
  message(FATAL_ERROR "EARSHOT_WASM_VARIANT is '${EARSHOT_WASM_VARIANT}'; it must be simd or scalar")
endif()

# emcc must never be given -I/usr/include (it would mix glibc's headers into
# the wasm libc). The two header-only libraries are reached through a folder
# holding nothing but links to them.
set(EARSHOT_XSIMD_DIR /usr/include/xsimd CACHE PATH "xsimd headers (libxsimd-dev)")
set(EARSHOT_RAPIDJSON_DIR /usr/include/rapidjson CACHE PATH "RapidJSON headers (rapidjson-dev)")
set(_earshot_sysinc ${CMAKE_BINARY_DIR}/sysinclude)
file(MAKE_DIRECTORY ${_earshot_sysinc})
foreach(_lib xsimd rapidjson)
  string(TOUPPER ${_lib} _LIB)
  set(_dir ${EARSHOT_${_LIB}_DIR})
  if(NOT EXISTS ${_dir})
    message(FATAL_ERROR "${_lib} headers not found at ${_dir} (install the Debian package, or set EARSHOT_${_LIB}_DIR)")
  endif()
  file(CREATE_LINK ${_dir} ${_earshot_sysinc}/${_lib} SYMBOLIC)
endforeach()

# The exported functions, read from the header: every line that starts a
# declaration of an earshot_<name>( function.
file(STRINGS ${CMAKE_SOURCE_DIR}/dsp/include/earshot/earshot.h _earshot_decls REGEX "^[a-z].*earshot_[a-z_]+\\(")
set(_earshot_abi)
foreach(_line IN LISTS _earshot_decls)
  string(REGEX MATCH "earshot_[a-z_]+\\(" _fn "${_line}")
  string(REPLACE "(" "" _fn "${_fn}")
  list(APPEND _earshot_abi ${_fn})
endforeach()
list(LENGTH _earshot_abi _n)
if(_n LESS 10)
  message(FATAL_ERROR "read only ${_n} functions from earshot.h: the declaration pattern in cmake/wasm.cmake no longer matches it")
endif()
set(_earshot_exports ${_earshot_abi} malloc free)
list(TRANSFORM _earshot_exports PREPEND "_" OUTPUT_VARIABLE _earshot_emcc_exports)
list(JOIN _earshot_emcc_exports "," _earshot_emcc_exports)

# The common core sources: every dsp/core/*.cpp but the per-variant one, so a
# new core file reaches both builds without an edit here.
file(GLOB _earshot_core CONFIGURE_DEPENDS ${CMAKE_SOURCE_DIR}/dsp/core/*.cpp)
list(REMOVE_ITEM _earshot_core ${CMAKE_SOURCE_DIR}/dsp/core/variant_graph.cpp)

set(_earshot_name earshot-${EARSHOT_WASM_VARIANT})
add_executable(earshot_wasm ${_earshot_core} dsp/core/variant_graph.cpp dsp/wasm/standalone.cpp)
set_target_properties(earshot_wasm PROPERTIES OUTPUT_NAME ${_earshot_name} SUFFIX ".wasm")
target_include_directories(earshot_wasm PRIVATE dsp/include dsp/core)
target_include_directories(earshot_wasm SYSTEM PRIVATE ${_earshot_sysinc})

# NDEBUG always: an assert (RapidJSON has many) would pull in stdio and with it
# WASI imports. EIGEN_DONT_VECTORIZE: Eigen's SSE path does not build under the
# emulation; the core does not use Eigen, but any future include stays safe.
target_compile_options(earshot_wasm PRIVATE -fno-exceptions -ffp-contract=off)
target_compile_definitions(earshot_wasm PRIVATE NDEBUG EIGEN_DONT_VECTORIZE EARSHOT_FUSED=0
  EARSHOT_WASM_VARIANT="${EARSHOT_WASM_VARIANT}")
if(EARSHOT_WASM_VARIANT STREQUAL simd)
  # -mbulk-memory: memcpy/memset become memory.copy/fill instructions (the
  # layers copy a bias or state vector per sample; measured up to 1.4x on
  # lstm-16, docs/wasm.md). Every engine with SIMD also has bulk memory; the
  # scalar build stays on the plain 1.0 feature set for the oldest engines.
  target_compile_options(earshot_wasm PRIVATE -msimd128 -msse4.1 -mbulk-memory)
  target_link_options(earshot_wasm PRIVATE -mbulk-memory)
  set(_arch xsimd::sse4_1)
  set(_xsimd 1)
else()
  set(_arch scalar_arch)
  set(_xsimd 0)
endif()
# The per-variant definitions apply to variant_graph.cpp alone, as in the native build.
set_source_files_properties(dsp/core/variant_graph.cpp PROPERTIES COMPILE_DEFINITIONS
  "EARSHOT_NS=v_wasm;EARSHOT_ARCH=${_arch};EARSHOT_XSIMD=${_xsimd};EARSHOT_VARIANT_NAME=\"${EARSHOT_WASM_VARIANT}\"")

# Memory: 1 MiB of stack (the core does not recurse except in the JSON parser),
# 2 MiB to start, growing as effects are loaded.
target_link_options(earshot_wasm PRIVATE
  -fno-exceptions
  --no-entry
  -sSTANDALONE_WASM
  -sALLOW_MEMORY_GROWTH
  -sINITIAL_MEMORY=2097152
  -sTOTAL_STACK=1048576
  -sSUPPORT_ERRNO=0
  -sFILESYSTEM=0
  "-sEXPORTED_FUNCTIONS=${_earshot_emcc_exports}")
# emcc's JS optimizer needs Debian's acorn (docs/wasm.md).
set_target_properties(earshot_wasm PROPERTIES RULE_LAUNCH_LINK "${CMAKE_COMMAND} -E env NODE_PATH=/usr/share/nodejs")

# emcc always adds a few exports of its own (stackSave, stackRestore,
# stackAlloc, the function table); wasm-metadce keeps only the roots listed
# here and removes the rest with the code only they reached.
find_program(EARSHOT_WASM_METADCE wasm-metadce HINTS /usr/bin /usr/lib/binaryen/bin REQUIRED)
set(_graph "[")
foreach(_e IN LISTS _earshot_exports ITEMS memory _initialize)
  string(APPEND _graph "\n  {\"name\": \"keep_${_e}\", \"export\": \"${_e}\", \"root\": true},")
endforeach()
string(REGEX REPLACE ",$" "\n]\n" _graph "${_graph}")
file(WRITE ${CMAKE_BINARY_DIR}/exports-graph.json "${_graph}")
add_custom_command(TARGET earshot_wasm POST_BUILD
  COMMAND sh -c "\"$0\" \"$1\" --graph-file \"$2\" --all-features -o \"$1\" > \"$3\""
          ${EARSHOT_WASM_METADCE} $<TARGET_FILE:earshot_wasm> ${CMAKE_BINARY_DIR}/exports-graph.json
          ${CMAKE_BINARY_DIR}/metadce.log
  COMMENT "Keeping only the C ABI exports in ${_earshot_name}.wasm"
  VERBATIM)

#pragma once
// Invariant checks shared by the fuzz targets. Under libFuzzer a broken invariant traps (the
// fuzzer saves the input); when the unit test replays the corpus (PLIMSOLL_FUZZ_REPLAY) it throws,
// so Catch reports which input and which check failed.

#include <stdexcept>

#ifdef PLIMSOLL_FUZZ_REPLAY
#define PLIMSOLL_FUZZ_CHECK(cond) \
  do {                            \
    if (!(cond)) throw std::logic_error("fuzz invariant failed: " #cond); \
  } while (0)
#else
#define PLIMSOLL_FUZZ_CHECK(cond) \
  do {                            \
    if (!(cond)) __builtin_trap(); \
  } while (0)
#endif

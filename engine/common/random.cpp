// Implementation of the keyed PCG streams.
#include "engine/common/random.h"

namespace flyby {
namespace {

// SplitMix64 finalizer: a bijective mixer so that (seed, index) pairs map to well-spread states.
std::uint64_t mix64(std::uint64_t x) {
  x += 0x9E3779B97F4A7C15ULL;
  x = (x ^ (x >> 30)) * 0xBF58476D1CE4E5B9ULL;
  x = (x ^ (x >> 27)) * 0x94D049BB133111EBULL;
  return x ^ (x >> 31);
}

}  // namespace

Rng make_stream(std::uint64_t master_seed, StreamPurpose purpose, std::uint64_t index) {
  const auto p = static_cast<std::uint64_t>(purpose);
  const pcg_extras::pcg128_t state =
      (static_cast<pcg_extras::pcg128_t>(mix64(master_seed)) << 64) | mix64(master_seed ^ mix64(p));
  // The stream selector: purpose in the top byte, index below. PCG uses (selector << 1) | 1.
  const pcg_extras::pcg128_t stream =
      (static_cast<pcg_extras::pcg128_t>(p) << 120) | static_cast<pcg_extras::pcg128_t>(index);
  return Rng(state, stream);
}

double uniform_open0(Rng& rng) {
  // 53 random bits -> k in [0, 2^53); return (k + 1) / 2^53 in (0, 1].
  const std::uint64_t k = rng() >> 11;
  return (static_cast<double>(k) + 1.0) * 0x1.0p-53;
}

}  // namespace flyby

// Reproducible randomness in tests (STYLE.md guideline 9): a fixed default seed, printed, and
// overridable with the environment variable FLYBY_TEST_SEED.
#pragma once

#include <cstdint>

namespace flyby::test {

// The master seed for random tests: FLYBY_TEST_SEED if set, else `default_seed`.
// Prints "[seed] <test-name>: <seed>" once per call so a failure can be replayed.
std::uint64_t seed(const char* test_name, std::uint64_t default_seed = 20261202);

}  // namespace flyby::test

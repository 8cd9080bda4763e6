// Seed lookup for random tests.
#include "tests/support/test_seed.h"

#include <cstdlib>
#include <iostream>
#include <string>

namespace flyby::test {

std::uint64_t seed(const char* test_name, std::uint64_t default_seed) {
  std::uint64_t s = default_seed;
  if (const char* env = std::getenv("FLYBY_TEST_SEED"); env && *env) {
    s = std::stoull(env);
  }
  std::cout << "[seed] " << test_name << ": " << s << " (override with FLYBY_TEST_SEED)\n";
  return s;
}

}  // namespace flyby::test

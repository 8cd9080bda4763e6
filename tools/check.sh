#!/usr/bin/env bash
# Builds flyby and runs the whole test suite (the README's test command; .ci/run calls it).
#   bash tools/check.sh              optimized build in build/, all tests
#   bash tools/check.sh --sanitize   AddressSanitizer + UBSan build in build-asan/, all tests
# Environment: FLYBY_TEST_SEED overrides the seed of every random test; JOBS the build jobs.
set -euo pipefail
cd "$(dirname "$0")/.."

build_dir=build
cmake_args=(-DCMAKE_BUILD_TYPE=Release)
if [ "${1:-}" = "--sanitize" ]; then
  build_dir=build-asan
  cmake_args=(-DCMAKE_BUILD_TYPE=RelWithDebInfo -DFLYBY_SANITIZE=ON -DFLYBY_BUILD_BENCH=OFF)
fi

bash tools/setup-deps.sh
jobs=${JOBS:-$(nproc)}
cmake -S . -B "$build_dir" -G Ninja "${cmake_args[@]}"
cmake --build "$build_dir" -j "$jobs"
export ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1:abort_on_error=1}
export UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
ctest --test-dir "$build_dir" --output-on-failure -j "$jobs"

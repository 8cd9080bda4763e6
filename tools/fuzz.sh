#!/usr/bin/env bash
# Builds the libFuzzer targets (tools/fuzz/) with clang, AddressSanitizer and UBSan in
# build-fuzz/ and runs each for a bounded time on a small generated seed corpus.
#   bash tools/fuzz.sh                 every target, FUZZ_SECONDS (default 15) seconds each
#   FUZZ_SECONDS=600 bash tools/fuzz.sh fuzz_text_import     one target, longer
# Exit status non-zero if a target finds a crash, a sanitizer report or an unexpected exception;
# the reproducer is left in build-fuzz/findings/.
set -euo pipefail
cd "$(dirname "$0")/.."
seconds=${FUZZ_SECONDS:-15}
jobs=${JOBS:-$(nproc)}
targets=("$@")
if [ ${#targets[@]} -eq 0 ]; then
  targets=(fuzz_record_reader fuzz_record_fields fuzz_text_import fuzz_binary_import)
fi

CC=clang CXX=clang++ cmake -S . -B build-fuzz -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo \
  -DFLYBY_BUILD_FUZZERS=ON -DFLYBY_SANITIZE=ON -DFLYBY_BUILD_TESTS=OFF -DFLYBY_BUILD_BENCH=OFF \
  -DFLYBY_WITH_MPI=OFF >/dev/null
cmake --build build-fuzz -j "$jobs" --target flyby_fuzzers

b=build-fuzz
seeds=$b/seeds
rm -rf "$seeds"
mkdir -p "$seeds"/{fuzz_record_reader,fuzz_record_fields,fuzz_text_import,fuzz_binary_import} "$b/corpus" "$b/findings"

# Text seeds: the first byte selects the importer options (see fuzz_text_import.cpp).
printf '\x00time_ps,channel\n1,A\n2,B\n2,A\n' > "$seeds/fuzz_text_import/plain"
printf '\x5dtime_s;channel\n0.000001;1\n0.5;B\n' > "$seeds/fuzz_text_import/semicolon_seconds"
printf '\x09  3   A\n1 B\n#x\n 9\tA\n' > "$seeds/fuzz_text_import/unsorted_spaces"
printf '\x44#@flyby format_version=1\n#@flyby resolution_ps=80.955\n#@flyby start_ps=0\n#@flyby duration_ps=100\n#@flyby channel=3,H,herald\n#@flyby provenance={"source":"simulation"}\ntime_ps,channel\n5,H\n' > "$seeds/fuzz_text_import/export"
# Binary seeds: 4 layout bytes (see fuzz_binary_import.cpp), then records.
printf '\x08\x30\x00\x08\x01\x00\x00\x00\x00\x00\x00\x00\x02\x00\x00\x00\x00\x00\x00\x00' > "$seeds/fuzz_binary_import/u32_time"
printf '\x0b\x33\x10\x28\x00\x00\x00\x05\x00\x00\x00\x00\x00\x00\x00\x01\x00\x00\x07\x00\x00\x00\x00\x00\x00\x00' > "$seeds/fuzz_binary_import/u64_time"
# Record seeds: valid records written by flyby itself.
printf 'time_ns,channel\n1,H\n1.5,V\n2,H\n1000,sync\n' > "$seeds/tmp.csv"
"$b/tools/flyby" import "$seeds/tmp.csv" -o "$seeds/fuzz_record_reader/small.h5" --channel H=H:herald --channel V=V --channel sync=sync:marker >/dev/null
awk 'BEGIN { t = 0; for (i = 0; i < 3000; i++) { t += 1 + (i * 7919) % 1000; print t "," (i % 3) } }' > "$seeds/tmp2.csv"
"$b/tools/flyby" import "$seeds/tmp2.csv" -o "$seeds/fuzz_record_reader/medium.h5" --time-unit ps >/dev/null
rm -f "$seeds"/tmp*.csv
head -c 256 /dev/zero > "$seeds/fuzz_record_fields/zeros"
printf 'flyby' > "$seeds/fuzz_record_fields/short"

export ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1:abort_on_error=1}
export UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
status=0
for t in "${targets[@]}"; do
  mkdir -p "$b/corpus/$t"
  echo "== $t: ${seconds}s =="
  if ! "$b/tools/fuzz/$t" -max_total_time="$seconds" -max_len=65536 -timeout=20 -rss_limit_mb=2048 \
      -artifact_prefix="$b/findings/$t-" -print_final_stats=1 "$b/corpus/$t" "$seeds/$t" 2>"$b/$t.log"; then
    echo "fuzz: $t FAILED, see $b/$t.log and $b/findings/"
    tail -n 40 "$b/$t.log"
    status=1
  else
    grep -E "stat::number_of_executed_units|stat::new_units_added" "$b/$t.log" | tr '\n' ' '
    echo
  fi
done
rm -rf /tmp/flyby-fuzz-*
exit $status

#!/usr/bin/env bash
# Measures the performance targets of issue 7 side by side, in one run, as ratios:
#   1. engine vs the numpy/scipy implementation of the same algorithm on the same problems
#      (bench/bench_engine BM_TwoLevel, BM_Rb87TwelveLevel vs bench/scipy_waiting_time.py;
#      both rates per CPU second of one core);
#   2. the thermal-beam reference scenario (configs/thermal_beam_reference.toml, 10^4 atoms/s):
#      simulated lab seconds per core-second (wall and CPU based);
#   3. OpenMP efficiency at 2 threads of every `flyby bench` workload.
# Usage: bash tools/bench-targets.sh [BUILD_DIR] [--quick]   (Release build with benchmarks)
# Prints a table; writes the raw JSON to BUILD_DIR/bench-targets/.
set -euo pipefail
cd "$(dirname "$0")/.."
build=${1:-build}
quick=${2:-}
out="$build/bench-targets"
mkdir -p "$out"
min_time=2
scipy_seconds=5
if [[ "$quick" == "--quick" ]]; then min_time=0.2; scipy_seconds=0.5; fi

echo "== engine (bench_engine, one core) ==" >&2
"$build/bench/bench_engine" --benchmark_filter='BM_TwoLevel$|BM_Rb87TwelveLevel$' \
  --benchmark_min_time="$min_time" --benchmark_format=json > "$out/engine.json"
echo "== numpy/scipy (bench/scipy_waiting_time.py, one core) ==" >&2
OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 /usr/bin/python3 bench/scipy_waiting_time.py "$scipy_seconds" > "$out/scipy.json"
echo "== flyby bench (1 and 2 threads) ==" >&2
"$build/tools/flyby" bench --json --threads-max 2 $quick > "$out/flyby-bench.json"

/usr/bin/python3 - "$out" <<'PY'
import json, sys
d = sys.argv[1]
eng = {b["name"]: b for b in json.load(open(d + "/engine.json"))["benchmarks"]}
sp = json.load(open(d + "/scipy.json"))
fb = {w["name"]: w for w in json.load(open(d + "/flyby-bench.json"))["workloads"]}
print("| target | measured | goal | met |")
print("|---|---|---|---|")
for bm, key, label in (("BM_TwoLevel", "two_level_jumps_per_s", "two-level atom"),
                       ("BM_Rb87TwelveLevel", "rb87_twelve_level_jumps_per_s", "87Rb F=2->F'=3, 12 levels")):
    r = eng[bm]["jumps_per_s"] / sp[key]
    print(f"| engine / numpy-scipy, {label} | {eng[bm]['jumps_per_s']:.3g} / {sp[key]:.3g} jumps per CPU s = {r:.0f}x | >= 100x | {'yes' if r >= 100 else 'no'} |")
th = fb["thermal_beam_reference"]["runs"][0]
print(f"| thermal-beam reference, lab s per core-s (1 thread, wall) | {th['lab_s_per_core_s']:.3g} (CPU based {th['lab_s_per_cpu_s']:.3g}) | >= 1 | {'yes' if th['lab_s_per_core_s'] >= 1 else 'no'} |")
for name, w in fb.items():
    if len(w["runs"]) < 2:
        continue
    r1, r2 = w["runs"][0], w["runs"][1]
    eff = r2["efficiency_fraction"]
    cpu_eff = (r2["rate_per_cpu_s"] / r1["rate_per_cpu_s"]) if r1["rate_per_cpu_s"] > 0 else 0
    busy = r2["cpu_s"] / (2 * r2["wall_s"]) if r2["wall_s"] > 0 else 0
    print(f"| OpenMP efficiency at 2 threads, {name} | {100*eff:.0f} % (work per CPU s {100*cpu_eff:.0f} %; threads on core {100*busy:.0f} %) | >= 90 % | {'yes' if eff >= 0.9 else 'no'} |")
PY

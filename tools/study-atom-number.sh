#!/usr/bin/env bash
# Worked study of docs/study-atom-number.md: heralded Zeeman beat contrast and decay against the
# mean atom number in the drive and the transit time, for one invented scenario (a slow
# monochromatic 87Rb beam, F = 1 → F′ = 0, 2 G field, one linear free-space detector), plus the
# same atom held at the drive centre (the limit of infinite transit time).
# Every point: flyby simulate → flyby correlate (autocorrelation) → flyby fit --model beats.
# Usage: tools/study-atom-number.sh [FLYBY] [OUTDIR]   (defaults: build/tools/flyby, out/study-atom-number)
# Writes OUTDIR/points.csv, OUTDIR/stationary.csv and the figures docs/figures/study-atom-number-*.png.
# The grid and the lab time per point can be changed through the environment (defaults shown):
#   STUDY_TRANSITS_US="0.5 1 2.5 5 10 20"  STUDY_ATOMS="0.3 1 3"  STUDY_DURATION_S=0.2
#   STUDY_STATIONARY_S=0.05  STUDY_FIGURES=1  (0: the CSV files only, figures left as they are)
set -euo pipefail
cd "$(dirname "$0")/.."
flyby="${1:-build/tools/flyby}"
out="${2:-out/study-atom-number}"
mkdir -p "$out"
waist_um=20
duration_s="${STUDY_DURATION_S:-0.2}"

# write_config FILE DURATION_S SOURCE_TABLE: the scenario with the given [source] table.
write_config() {
  cat > "$1" <<EOT
# Invented scenario of docs/study-atom-number.md.
[atom]
species = "Rb87"
ground_F = 1
excited_F = 0
[field]
B_G = [2.0, 0, 0]
[[drive]]
name = "probe"
kind = "side"
direction_dir = [0, 0, 1]
polarization = "linear"
polarization_dir = [1, 1, 0]
waist_um = $waist_um
rabi_MHz = 3.0
[[channel]]
name = "det"
source = "free_space"
direction_dir = [1, 0, 0]
polarization = "linear"
polarization_dir = [0, 1, 0]
solid_angle_sr = 6.0
efficiency_fraction = 1.0
$3
[run]
duration_s = $2
seed_id = 1
EOT
}

# run_point TAG: simulate OUT/TAG.toml, correlate the detector with itself, fit damped beats past
# τ = 100 ns (the antibunching dip: 1/Γ = 26 ns, but refilling the dark ground states takes a
# fraction of the Larmor period);
# prints "tags,jumps,level,±,amplitude,±,decay_us,±,freq_MHz,±" (empty fit fields if it failed).
run_point() {
  "$flyby" simulate "$out/$1.toml" -o "$out/$1.h5" --json > "$out/$1.summary.json"
  "$flyby" correlate "$out/$1.h5" --start det --stop det --bin-ns 10 --range-ns 3000 -o "$out/$1.csv" > /dev/null 2>&1
  "$flyby" fit "$out/$1.csv" --model beats --tau-min-ns 100 --tau-max-ns 3000 -o "$out/$1.fit.json" > /dev/null 2>&1 ||
    rm -f "$out/$1.fit.json"
  /usr/bin/python3 - "$out/$1.fit.json" "$out/$1.summary.json" <<'EOPY'
import json, os, sys
summ = json.load(open(sys.argv[2]))
row = [sum(c["recorded_count"] for c in summ["channels"]), summ["jumps_count"]]
names = ("level", "beat.amplitude", "beat.decay_us", "beat.freq_MHz")
if os.path.exists(sys.argv[1]):
    p = {q["name"]: q for q in json.load(open(sys.argv[1]))["parameters"]}
    row += [x for n in names for x in (p[n]["value"], p[n]["std_error"])]
else:
    row += [""] * 8
print(",".join(str(x) for x in row))
EOPY
  echo "done $1" >&2
}

echo "transit_us,mean_atoms_count,flux_per_s,tags_count,jumps_count,level,level_err,amplitude,amplitude_err,decay_us,decay_err,freq_MHz,freq_err" > "$out/points.csv"
for transit_us in ${STUDY_TRANSITS_US:-0.5 1 2.5 5 10 20}; do
  speed=$(/usr/bin/python3 -c "print($waist_um / $transit_us)")          # µm/µs = m/s
  for atoms in ${STUDY_ATOMS:-0.3 1 3}; do
    # Mean number of atoms within the 1/e² radius of the drive: N = flux · 2w/v.
    flux=$(/usr/bin/python3 -c "print($atoms / (2 * $transit_us) * 1e6)")
    tag="T${transit_us}_N${atoms}"
    write_config "$out/$tag.toml" "$duration_s" "[source]
kind = \"beam\"
speed_distribution = \"monochromatic\"
speed_m_per_s = $speed
transverse_profile = \"gaussian\"
transverse_sigma_um = 0.01
axial_extent_um = 0
flux_per_s = $flux"
    echo "$transit_us,$atoms,$flux,$(run_point "$tag")" >> "$out/points.csv"
  done
done

# One atom held at the drive centre: the beat decay without transit.
stationary_s="${STUDY_STATIONARY_S:-0.05}"
write_config "$out/rest.toml" "$stationary_s" '[source]
kind = "stationary"
positions_um = [[0, 0, 0]]'
echo "duration_s,tags_count,jumps_count,level,level_err,amplitude,amplitude_err,decay_us,decay_err,freq_MHz,freq_err" > "$out/stationary.csv"
echo "$stationary_s,$(run_point rest)" >> "$out/stationary.csv"

if [ "${STUDY_FIGURES:-1}" = 1 ]; then
  /usr/bin/python3 tools/study-atom-number-plot.py "$out/points.csv" docs/figures "$out/stationary.csv"
fi

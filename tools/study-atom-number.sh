#!/usr/bin/env bash
# Worked study of docs/study-atom-number.md: heralded Zeeman beat contrast and decay against the
# mean atom number in the drive and the transit time, for one invented scenario (a slow
# monochromatic 87Rb beam, F = 1 → F′ = 0, 2 G field, one linear free-space detector).
# Every point: flyby simulate → flyby correlate (autocorrelation) → flyby fit --model beats.
# Usage: tools/study-atom-number.sh [FLYBY] [OUTDIR]   (defaults: build/tools/flyby, out/study-atom-number)
# Writes OUTDIR/points.csv and the figures docs/figures/study-atom-number-*.png.
# The grid and the lab time per point can be changed through the environment:
#   STUDY_TRANSITS_US="2.5 5 10"  STUDY_ATOMS="0.3 1 3"  STUDY_DURATION_S=0.03  STUDY_FIGURES=1
# (STUDY_FIGURES=0: points.csv only, figures left as they are).
set -euo pipefail
cd "$(dirname "$0")/.."
flyby="${1:-build/tools/flyby}"
out="${2:-out/study-atom-number}"
mkdir -p "$out"
waist_um=20
duration_s="${STUDY_DURATION_S:-0.03}"
echo "transit_us,mean_atoms_count,flux_per_s,tags_count,level,level_err,amplitude,amplitude_err,decay_us,decay_err,freq_MHz,freq_err" > "$out/points.csv"
for transit_us in ${STUDY_TRANSITS_US:-2.5 5 10}; do
  speed=$(/usr/bin/python3 -c "print($waist_um / $transit_us)")          # µm/µs = m/s
  for atoms in ${STUDY_ATOMS:-0.3 1 3}; do
    # Mean number of atoms within the 1/e² radius of the drive: N = flux · 2w/v.
    flux=$(/usr/bin/python3 -c "print($atoms / (2 * $transit_us) * 1e6)")
    tag="T${transit_us}_N${atoms}"
    cat > "$out/$tag.toml" <<EOT
# Invented scenario of docs/study-atom-number.md (transit $transit_us us, mean atoms $atoms).
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
[source]
kind = "beam"
speed_distribution = "monochromatic"
speed_m_per_s = $speed
transverse_profile = "gaussian"
transverse_sigma_um = 0.01
axial_extent_um = 0
flux_per_s = $flux
[run]
duration_s = $duration_s
seed_id = 1
EOT
    "$flyby" simulate "$out/$tag.toml" -o "$out/$tag.h5" --json > "$out/$tag.summary.json"
    "$flyby" correlate "$out/$tag.h5" --start det --stop det --bin-ns 10 --range-ns 3000 -o "$out/$tag.csv" > /dev/null
    "$flyby" fit "$out/$tag.csv" --model beats --tau-min-ns 20 --tau-max-ns 3000 -o "$out/$tag.fit.json" > /dev/null || true
    /usr/bin/python3 - "$out/$tag.fit.json" "$out/$tag.summary.json" "$transit_us" "$atoms" "$flux" >> "$out/points.csv" <<'EOPY'
import json, sys
fit = json.load(open(sys.argv[1])); summ = json.load(open(sys.argv[2]))
p = {q["name"]: q for q in fit["parameters"]}
tags = sum(c["recorded_count"] for c in summ["channels"])
v = lambda n: (p[n]["value"], p[n]["std_error"])
row = [sys.argv[3], sys.argv[4], sys.argv[5], tags, *v("level"), *v("beat.amplitude"), *v("beat.decay_us"), *v("beat.freq_MHz")]
print(",".join(str(x) for x in row))
EOPY
    echo "done $tag" >&2
  done
done
if [ "${STUDY_FIGURES:-1}" = 1 ]; then
  /usr/bin/python3 tools/study-atom-number-plot.py "$out/points.csv" docs/figures
fi

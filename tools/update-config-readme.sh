#!/usr/bin/env bash
# Regenerates the key reference at the end of configs/README.md from `flyby config --markdown`
# (the test "configs/README.md contains the generated key reference" fails until this is run
# after a change to models/config/config_keys.cpp). Usage: tools/update-config-readme.sh [FLYBY]
set -euo pipefail
cd "$(dirname "$0")/.."
flyby="${1:-build/tools/flyby}"
readme=configs/README.md
marker='## Key reference'
head_part="$(sed "/^${marker}\$/q" "$readme")"
{ printf '%s\n\n' "$head_part"; "$flyby" config --markdown; } > "$readme.tmp"
mv "$readme.tmp" "$readme"
echo "updated $readme"

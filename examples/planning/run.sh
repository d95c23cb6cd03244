#!/usr/bin/env bash
# Worked planning example: simulate one night of an invented array on an invented double source,
# then forecast whether the double can be told from a single elliptical Gaussian.
# Usage: bash examples/planning/run.sh [OUTPUT_FOLDER]   (default ./planning-out)
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
out="${1:-planning-out}"
mkdir -p "$out"
obs=(--ra 14h02m11.3s --dec +38d45m12s --start 2027-04-10T03:00 --frequency 86GHz --source "PLN 1402+387")

# 1. one simulated night: 8 h, 60 s integrations, 2 GHz in 4 channels, modest gain errors
uvfit simulate "$here/array.toml" "$here/double.toml" "${obs[@]}" --duration 8h --integration 60s \
    --bandwidth 2GHz --channels 4 --gain-error 0.05 --phase-error 10 --seed 1 \
    -o "$out/night.uvfits" --json "$out/night.json" --force

# 2. a full night: is the double found, and preferred over one elliptical Gaussian?
uvfit forecast "$here/array.toml" "$here/double.toml" "$here/single.toml" "${obs[@]}" \
    --duration 8h --integration 120s --bandwidth 2GHz --trials 20 --seed 1 \
    --json "$out/forecast-8h.json" --force

# 3. a one-hour snapshot with a narrow band: the same question, a harder answer
uvfit forecast "$here/array.toml" "$here/double.toml" "$here/single.toml" "${obs[@]}" \
    --duration 1h --integration 300s --bandwidth 256MHz --trials 20 --seed 1 \
    --json "$out/forecast-1h.json" --force

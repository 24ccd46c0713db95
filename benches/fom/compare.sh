#!/usr/bin/env bash
# Why this exists: one command that measures the figure of merit (FOM, noise
# per CPU second; see README.md) of an old and a new exobound binary on the
# same bench scenario, one after the other on this machine, and prints
# FOM_new / FOM_old for the dayside near-surface density and the equatorial
# column. measure.py does the work; this only runs it twice and compares.
#
# Usage: benches/fom/compare.sh OLD_EXOBOUND NEW_EXOBOUND [OUT_DIR]
#   environment: K (seeds per engine, default 8), JOBS (seed runs at once,
#   default 2), OLD_COMMIT / NEW_COMMIT (recorded commits, default: found
#   from each binary's workspace), SCENARIO (default steady-sodium.toml here)
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
old_bin="${1:?usage: compare.sh OLD_EXOBOUND NEW_EXOBOUND [OUT_DIR]}"
new_bin="${2:?usage: compare.sh OLD_EXOBOUND NEW_EXOBOUND [OUT_DIR]}"
out="${3:-fom-compare}"
k="${K:-8}"
jobs="${JOBS:-2}"
scenario="${SCENARIO:-$here/steady-sodium.toml}"

old_commit=()
new_commit=()
[[ -n "${OLD_COMMIT:-}" ]] && old_commit=(--commit "$OLD_COMMIT")
[[ -n "${NEW_COMMIT:-}" ]] && new_commit=(--commit "$NEW_COMMIT")

python3 "$here/measure.py" run --exobound "$old_bin" --scenario "$scenario" \
    --seeds "$k" --jobs "$jobs" --out "$out/old" --label old "${old_commit[@]}"
python3 "$here/measure.py" run --exobound "$new_bin" --scenario "$scenario" \
    --seeds "$k" --jobs "$jobs" --out "$out/new" --label new "${new_commit[@]}"
python3 "$here/measure.py" compare "$out/old/fom.json" "$out/new/fom.json" \
    --out "$out/compare.json"

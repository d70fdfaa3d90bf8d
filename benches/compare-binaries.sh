#!/usr/bin/env bash
# Step throughput of two thicket binaries on the same scenarios, measured in
# one interleaved run (old, new, old, new, ...) so machine noise hits both:
# prints the best wall time of each and the ratio new/old per scenario.
#   usage: benches/compare-binaries.sh OLD_BINARY NEW_BINARY [REPEATS]
set -euo pipefail
old=$1; new=$2; repeats=${3:-5}
root=$(cd "$(dirname "$0")/.." && pwd)
work=$(mktemp -d); trap 'rm -rf "$work"' EXIT
# name | scenario | overrides (a few seconds of stepping each, recording rare) | overrides for NEW only
# (keys the old binary does not know, to select the same model)
cases=(
  "free|configs/free.toml|--set species.bead.count=20000 --set integrator.steps=20000 --set output.record_every_steps=10000"
  "obstructed|configs/crowded.toml|--set species.probe.count=4000 --set integrator.steps=80000 --set output.record_every_steps=40000"
  "crowding|configs/mobile.toml|--set integrator.steps=6000 --set output.record_every_steps=3000"
  "slit-hydro|configs/slit.toml|--set species.globin.count=4000 --set integrator.steps=20000 --set output.record_every_steps=10000"
  "pore-hydro|configs/pore.toml|--set species.dextrin.count=4000 --set integrator.steps=20000 --set output.record_every_steps=10000|${NEW_PORE_SETS:-}"
  "membrane|configs/membrane.toml|--set species.solute.count=4000 --set integrator.steps=20000 --set output.record_every_steps=10000 --set geometry.flux_after_s=1e-6"
)
printf "%-12s %10s %10s %8s\n" scenario old_s new_s new/old
for c in "${cases[@]}"; do
  IFS='|' read -r name cfg sets new_sets <<<"$c"
  best_old=0; best_new=0
  for ((r = 0; r < repeats; r++)); do
    for which in old new; do
      bin=${!which}
      extra=""
      if [ "$which" = new ]; then extra=${new_sets:-}; fi
      start=$(date +%s%N)
      # shellcheck disable=SC2086
      if ! "$bin" run "$root/$cfg" --out "$work/$name-$which.h5" --force $sets $extra >"$work/log" 2>&1; then
        echo "$which failed on $name:"; cat "$work/log"; exit 1
      fi
      t=$(( $(date +%s%N) - start ))
      if [ "$which" = old ]; then
        if [ "$best_old" -eq 0 ] || [ "$t" -lt "$best_old" ]; then best_old=$t; fi
      else
        if [ "$best_new" -eq 0 ] || [ "$t" -lt "$best_new" ]; then best_new=$t; fi
      fi
    done
  done
  awk -v n="$name" -v o="$best_old" -v w="$best_new" 'BEGIN { printf "%-12s %10.3f %10.3f %8.3f\n", n, o / 1e9, w / 1e9, w / o }'
done

#!/usr/bin/env bash
# Time from SIGTERM (or SIGINT) to exit during a long EM fit: a measurement, never a test.
# Usage: bash bench/stop_latency.sh [BUILD_DIR] [TERM|INT] [RUNS]
# The study has one long fit per unit (8 states, horizon 20, 5000 pilot episodes, a tolerance that
# never stops EM early); the signal comes 3 s after the start, in the middle of the first fit.
set -euo pipefail
build=${1:-build}
sig=${2:-TERM}
runs=${3:-5}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cat > "$work/longfit.yaml" <<'YAML'
name: longfit
environment: { states: 8, actions: 3, observations: 6, horizon: 20, draws: 1 }
budgets: { logged: [0], pilot: [5000] }
strategies: [pilot-only]
replicates: 2
fit: { restarts: 1, max_iterations: 100000, tolerance: 1.0e-300 }
YAML
for i in $(seq 1 "$runs"); do
  rm -rf "$work/run"
  "$build/dobudget" plan "$work/longfit.yaml" --out "$work/run" --threads 2 --quiet >"$work/log" 2>&1 &
  pid=$!
  sleep 3
  t0=$(date +%s.%N)
  kill "-$sig" "$pid"
  rc=0
  wait "$pid" || rc=$?
  t1=$(date +%s.%N)
  units=$(($(wc -l <"$work/run/units.journal") - 1))
  printf 'run %d: SIG%s -> exit %d after %.3f s, %d units journaled\n' "$i" "$sig" "$rc" "$(echo "$t1 - $t0" | bc)" "$units"
done

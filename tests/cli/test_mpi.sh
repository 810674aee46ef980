#!/usr/bin/env bash
# End-to-end check of the MPI build (issue 5, docs/clusters.md, "MPI"): `mpirun -n P dobudget-mpi plan`
# writes the same runs.csv and answer.csv, byte for byte, as a single-process `dobudget plan
# --threads 1`, whatever P and the threads per rank; only rank 0 prints; a finished directory is
# resumed, a foreign one refused and a bad study reported once, each without hanging; --shard
# still selects its units. Run by ctest (tests/CMakeLists.txt):
#   test_mpi.sh DOBUDGET DOBUDGET_MPI MPIEXEC     (no arguments: MPI was not found, skip)
set -euo pipefail

if (($# < 3)); then
  echo "SKIPPED: MPI was not found when the build was configured (Debian: bash .ci/install-deps --mpi, then"
  echo "configure again); the MPI build of dobudget plan is not tested"
  exit 77
fi
dobudget=$1
dobudget_mpi=$2
mpiexec=$3

launcher=("$mpiexec")
if "$mpiexec" --version 2>&1 | grep -qE "Open MPI|OpenRTE"; then
  # Root in containers and CI; more ranks than cores (ctest -j runs other tests beside this one);
  # no pinning (two ranks pinned to one busy core would crawl); no single-copy (CMA) transfers,
  # which containers without ptrace permission refuse.
  export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
  export OMPI_MCA_btl_vader_single_copy_mechanism=none
  launcher+=(--oversubscribe --bind-to none)
fi
mpirun_n() { # mpirun_n P ARGS...: dobudget-mpi on P ranks, killed if it hangs
  local p=$1
  shift
  timeout -k 10 300 "${launcher[@]}" -n "$p" "$dobudget_mpi" "$@"
}

dir=$(mktemp -d "${TMPDIR:-/tmp}/dobudget-test-mpi-XXXXXX")
trap 'rm -rf "$dir"' EXIT
failures=0
check() { # check DESCRIPTION COMMAND...
  local what=$1
  shift
  if "$@"; then echo "ok: $what"; else echo "FAILED: $what"; failures=$((failures + 1)); fi
}

# The tiny study of tests/cli/cli_harness.hpp with 8 replicates: 2 draws x 8 = 16 units, enough
# work (about 0.3 s) for every rank to take some.
cat >"$dir/study.yaml" <<'EOF'
name: tiny
seed: 7
environment: { states: 3, actions: 2, observations: 2, horizon: 4, draws: 2,
               dynamics_concentration: 0.2, observation_noise: 0.1 }
logging: { privilege: 1.0, temperature: 0.1 }
budgets: { logged: [0, 60], pilot: [5, 20] }
replicates: 8
fit: { restarts: 2, max_iterations: 40 }
evaluation: { trajectories: 50 }
targets: { model_kl: 0.05 }
EOF
study=$dir/study.yaml

"$dobudget" plan "$study" --quiet --threads 1 --out "$dir/single" >"$dir/single.out"

# 2 ranks x 1 thread (rank 0 computes too), then 3 ranks x 2 threads (several units in flight per rank).
all_units="$(seq 0 15 | tr '\n' ' ')"
for layout in "2 1" "3 2"; do
  read -r p t <<<"$layout"
  run=$dir/mpi-$p-$t
  code=0
  mpirun_n "$p" plan "$study" --threads "$t" --out "$run" >"$run.out" 2>"$run.err" || code=$?
  check "mpirun -n $p, --threads $t: exit code 0 (got $code)" test "$code" -eq 0
  counts=$(sed -n 's/^units computed by MPI ranks 0\.\.[0-9]*: //p' "$run.err")
  echo "units computed by each rank: $counts"
  check "mpirun -n $p, --threads $t: every rank computed units" \
    awk -v p="$p" '{ if (NF != p) exit 1; for (i = 1; i <= NF; i++) if ($i < 1) exit 1 }' <<<"$counts"
  check "mpirun -n $p, --threads $t: runs.csv byte-identical to one process" cmp "$dir/single/runs.csv" "$run/runs.csv"
  check "mpirun -n $p, --threads $t: answer.csv byte-identical to one process" cmp "$dir/single/answer.csv" "$run/answer.csv"
  check "mpirun -n $p, --threads $t: only rank 0 prints (one results block)" \
    test "$(grep -c "dobudget is a simulation" "$run.out")" -eq 1
  check "mpirun -n $p, --threads $t: each unit recorded once" \
    test "$(tail -n +2 "$run/units.journal" | cut -f1 | sort -n | tr '\n' ' ')" = "$all_units"
done

# A finished directory: nothing computed, the same tables.
run=$dir/mpi-2-1
code=0
mpirun_n 2 plan "$study" --quiet --threads 1 --out "$run" >"$dir/resume.out" 2>&1 || code=$?
check "resume under MPI: exit code 0 (got $code)" test "$code" -eq 0
check "resume under MPI: every unit resumed" grep -q "16 resumed" "$dir/resume.out"
check "resume under MPI: runs.csv unchanged" cmp "$dir/single/runs.csv" "$run/runs.csv"

# A directory of another study: refused with exit code 2, workers released (no hang).
cp "$study" "$dir/other.yaml"
echo "assurance: 0.9" >>"$dir/other.yaml"
code=0
mpirun_n 2 plan "$dir/other.yaml" --quiet --out "$run" >"$dir/foreign.out" 2>&1 || code=$?
check "foreign directory under MPI: exit code 2 (got $code)" test "$code" -eq 2
check "foreign directory under MPI: refused as a different study" grep -q "different study" "$dir/foreign.out"

# A bad study: exit code 2, one message (from rank 0), nothing written.
printf 'name: x\nenvironment: { states: 0 }\n' >"$dir/bad.yaml"
code=0
mpirun_n 2 plan "$dir/bad.yaml" --quiet --out "$dir/bad" >"$dir/bad.out" 2>&1 || code=$?
check "bad study under MPI: exit code 2 (got $code)" test "$code" -eq 2
check "bad study under MPI: reported once" test "$(grep -c "environment.states" "$dir/bad.out")" -eq 1
check "bad study under MPI: nothing written" test ! -e "$dir/bad"

# --shard K/N with MPI: the ranks share shard 1/2's units (the odd ones) and only those.
code=0
mpirun_n 2 plan "$study" --quiet --threads 1 --shard 1/2 --out "$dir/shard" >"$dir/shard.out" 2>&1 || code=$?
check "--shard 1/2 under MPI: exit code 0 (got $code)" test "$code" -eq 0
check "--shard 1/2 under MPI: units 1, 3, ..., 15 computed" \
  test "$(tail -n +2 "$dir/shard/units.journal" | cut -f1 | sort -n | tr '\n' ' ')" = "$(seq 1 2 15 | tr '\n' ' ')"

if ((failures > 0)); then
  echo "$failures check(s) failed; outputs:"
  for f in "$dir"/*.out; do echo "== $f"; cat "$f"; done
  exit 1
fi
echo "all MPI checks passed"

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

# Batches (guided self-scheduling, src/mpi/mpi_executor.cpp): 1,200 near-empty units on 3 ranks x
# 1 thread, so workers take many units per ASSIGN while the batches shrink to single units at the
# end. Same runs.csv as one process, each unit recorded once, fewer batches than units handed out.
cat >"$dir/many.yaml" <<'EOF2'
name: many
seed: 3
environment: { states: 2, actions: 1, observations: 2, horizon: 1, draws: 4 }
budgets: { logged: [0], pilot: [2] }
replicates: 300
fit: { restarts: 1, max_iterations: 1 }
evaluation: { trajectories: 1 }
targets: { model_kl: 0.05 }
EOF2
"$dobudget" plan "$dir/many.yaml" --quiet --threads 1 --out "$dir/many-single" >"$dir/many-single.out"
code=0
mpirun_n 3 plan "$dir/many.yaml" --threads 1 --out "$dir/many-mpi" >"$dir/many-mpi.out" 2>"$dir/many-mpi.err" || code=$?
check "batches, mpirun -n 3: exit code 0 (got $code)" test "$code" -eq 0
check "batches, mpirun -n 3: runs.csv byte-identical to one process" cmp "$dir/many-single/runs.csv" "$dir/many-mpi/runs.csv"
check "batches, mpirun -n 3: each unit recorded once" \
  test "$(tail -n +2 "$dir/many-mpi/units.journal" | cut -f1 | sort -n | uniq | wc -l)" -eq 1200 -a \
  "$(tail -n +2 "$dir/many-mpi/units.journal" | wc -l)" -eq 1200
handout=$(grep "^MPI hand-out: " "$dir/many-mpi.err" || true)
echo "$handout"
read -r remote batches <<<"$(sed -n 's/^MPI hand-out: \([0-9]*\) units to ranks 1\.\.2 in \([0-9]*\) batches.*/\1 \2/p' <<<"$handout")"
check "batches, mpirun -n 3: workers took units in batches ($remote units in $batches batches)" \
  test "${remote:-0}" -gt "${batches:-0}" -a "${batches:-0}" -ge 2

# Large messages both ways (a deadlock while both sides sent with blocking MPI_Send above the eager
# limit): 6,000 near-empty units, a directory whose journal keeps the units with index mod 5 in
# {0, 2}, so the 3,600 left have gaps that (first, count, stride) runs do not compress and the
# first ASSIGNs list about 600 indices (4.8 KB, above OpenMPI's 4 KB eager limit for shared
# memory) while the workers send RESULTs of many records. runs.csv byte-identical to one process.
sed 's/^replicates: 300$/replicates: 1500/' "$dir/many.yaml" >"$dir/big.yaml"
"$dobudget" plan "$dir/big.yaml" --quiet --threads 1 --out "$dir/big-single" >"$dir/big-single.out"
cp -r "$dir/big-single" "$dir/big-gaps"
rm "$dir/big-gaps/runs.csv" "$dir/big-gaps/timings.csv" "$dir/big-gaps"/answer.*
awk -F '\t' 'NR == 1 || $1 % 5 == 0 || $1 % 5 == 2' "$dir/big-single/units.journal" >"$dir/big-gaps/units.journal"
code=0
mpirun_n 3 plan "$dir/big.yaml" --threads 1 --out "$dir/big-gaps" >"$dir/big-gaps.out" 2>"$dir/big-gaps.err" || code=$?
check "large ASSIGN and RESULT, mpirun -n 3: exit code 0 (got $code)" test "$code" -eq 0
check "large ASSIGN and RESULT, mpirun -n 3: runs.csv byte-identical to one process" \
  cmp "$dir/big-single/runs.csv" "$dir/big-gaps/runs.csv"
check "large ASSIGN and RESULT, mpirun -n 3: 2,400 units resumed" grep -q "(2400 resumed)" "$dir/big-gaps.out"

# --shard 1/3 of the big study under MPI: strided runs (stride 3), each unit once.
code=0
mpirun_n 3 plan "$dir/big.yaml" --quiet --threads 1 --shard 1/3 --out "$dir/big-shard" >"$dir/big-shard.out" 2>&1 || code=$?
check "--shard 1/3 of 6,000 units under MPI: exit code 0 (got $code)" test "$code" -eq 0
check "--shard 1/3 of 6,000 units under MPI: units 1, 4, ..., 5998 recorded once each" \
  test "$(tail -n +2 "$dir/big-shard/units.journal" | cut -f1 | sort -n | tr '\n' ' ')" = "$(seq 1 3 5999 | tr '\n' ' ')"

# SIGTERM to rank 0 part-way, once a few units are journalled: rank 0 stops handing out units and
# sends CANCEL, the workers give back the units of their batches (CANCELLED), the job exits 130 with
# only whole units journalled, and a rerun computes the rest: runs.csv byte-identical to one
# process. Units of about 50 ms (the tiny study with 4 restarts of 80 iterations, 40 replicates:
# 80 units; first batches of 14), so that batches are in flight when it comes. (A SIGTERM to
# mpirun itself reaches the ranks too, but OpenMPI then exits 1 whatever the ranks return.)
sed 's/^replicates: 8$/replicates: 40/; s/^fit: .*/fit: { restarts: 4, max_iterations: 80 }/' "$study" >"$dir/long.yaml"
"$dobudget" plan "$dir/long.yaml" --quiet --threads 1 --out "$dir/long-single" >"$dir/long-single.out"
journalled() { if [[ -f $1 ]]; then echo $(($(wc -l <"$1") - 1)); else echo 0; fi; }
"${launcher[@]}" -n 3 "$dobudget_mpi" plan "$dir/long.yaml" --quiet --threads 1 --out "$dir/long-mpi" \
  >"$dir/long-cut.out" 2>&1 &
job=$!
for _ in $(seq 1200); do
  (($(journalled "$dir/long-mpi/units.journal") >= 3)) && break
  kill -0 "$job" 2>/dev/null || break
  sleep 0.05
done
rank0=""
for status in /proc/[0-9]*/status; do # mpirun's children; rank 0 by its environment (OpenMPI)
  ppid=""
  while read -r key value; do [[ $key == PPid: ]] && ppid=$value && break; done <"$status" 2>/dev/null || true
  [[ $ppid == "$job" ]] || continue
  pid=${status#/proc/}
  pid=${pid%/status}
  tr '\0' '\n' <"/proc/$pid/environ" 2>/dev/null | grep -qx OMPI_COMM_WORLD_RANK=0 && rank0=$pid
done
if [[ -n $rank0 ]]; then kill -TERM "$rank0"; else kill -TERM "$job" 2>/dev/null || true; fi
code=0
wait "$job" || code=$?
cut_short=$(journalled "$dir/long-mpi/units.journal")
echo "interrupted run (rank 0: pid ${rank0:-not found}): exit code $code, $cut_short of 80 units journalled"
check "SIGTERM to rank 0 under MPI: exit code 130 (got $code)" test "$code" -eq 130
check "SIGTERM to rank 0 under MPI: some units, not all, journalled ($cut_short)" test "$cut_short" -ge 3 -a "$cut_short" -lt 80
check "SIGTERM to rank 0 under MPI: the journal ends with a whole record" \
  test "$(tail -c 1 "$dir/long-mpi/units.journal" | od -An -c | tr -d ' ')" = '\n'
code=0
mpirun_n 3 plan "$dir/long.yaml" --quiet --threads 1 --out "$dir/long-mpi" >"$dir/long-resume.out" 2>&1 || code=$?
check "SIGTERM to rank 0 under MPI: the rerun exits 0 (got $code)" test "$code" -eq 0
check "SIGTERM to rank 0 under MPI: after the rerun, runs.csv byte-identical to one process" \
  cmp "$dir/long-single/runs.csv" "$dir/long-mpi/runs.csv"

if ((failures > 0)); then
  echo "$failures check(s) failed; outputs:"
  for f in "$dir"/*.out; do echo "== $f"; cat "$f"; done
  exit 1
fi
echo "all MPI checks passed"

#!/usr/bin/env bash
# Builds the fuzz targets with clang's libFuzzer (ASan + UBSan), seeds a corpus per target from the
# shipped study and model files and from a tiny `dobudget plan` run, and runs each target for N
# executions. Nothing is written outside BUILD (corpora, crash artifacts and logs go under it).
#
#   bash tests/fuzz/run.sh [N [BUILD]]       N executions per target (default 1000000),
#                                            BUILD the build folder (default build-fuzz)
#   TARGETS="fuzz_journal" bash tests/fuzz/run.sh 100000     only some targets
#
# A crash, hang (-timeout), out-of-memory (-rss_limit_mb) or sanitizer report stops the target;
# libFuzzer saves the input under BUILD/fuzz-artifacts/ and this script exits 1 after the others.
# Reproduce one input: BUILD/fuzz/fuzz_study_file BUILD/fuzz-artifacts/fuzz_study_file-crash-...
set -euo pipefail
cd "$(dirname "$0")/../.."
runs=${1:-1000000}
build=${2:-build-fuzz}
targets=${TARGETS:-fuzz_study_file fuzz_model_file fuzz_runs_table fuzz_journal}
max_len=16384   # bytes; room for a study with a sweep and an inline model, or a journal of dozens of units
timeout=10      # seconds for one input: anything slower is reported as a hang
rss_mb=2048     # memory for the whole process: more is reported as out-of-memory

cmake -S . -B "$build" -DCMAKE_BUILD_TYPE=Release -DCMAKE_CXX_COMPILER=clang++ -DDOBUDGET_FUZZ=ON \
  -DDOBUDGET_TESTS=OFF $(command -v ccache >/dev/null && echo -DCMAKE_CXX_COMPILER_LAUNCHER=ccache) >/dev/null
cmake --build "$build" -j2 --target fuzzers dobudget

corpus="$build/fuzz-corpus"
artifacts="$build/fuzz-artifacts"
logs="$build/fuzz-logs"
mkdir -p "$artifacts" "$logs"
for t in $targets; do mkdir -p "$corpus/$t"; done

# Seeds. Study files: the shipped ones (studies/greenhouse names model.yaml, which the target puts
# beside its study file). Model files: the shipped model and the environments `draw` writes.
cp configs/*.yaml configs/presets/*.yaml "$corpus/fuzz_study_file/"
for f in studies/*/study.yaml; do cp "$f" "$corpus/fuzz_study_file/$(basename "$(dirname "$f")").yaml"; done
cp studies/*/model.yaml "$corpus/fuzz_model_file/"
# Run tables and journals: a tiny study planned with this build's dobudget (seconds).
seed_dir=$(mktemp -d)
trap 'rm -rf "$seed_dir"' EXIT
cat > "$seed_dir/tiny.yaml" <<'YAML'
name: fuzz-seed
seed: 5
environment: { states: 2, actions: 2, observations: 2, horizon: 4, draws: 1 }
budgets: { logged: [0, 10], pilot: [5, 10] }
replicates: 2
measures: [model_kl, return_gap]
targets: { model_kl: 0.05, return_gap: 0.2 }
fit: { restarts: 1, max_iterations: 20 }
evaluation: { trajectories: 50 }
planner: { belief_points: 20, rollouts: 50 }
YAML
export ASAN_OPTIONS=detect_leaks=0   # the seeding run only; the fuzzers below run with leak checks
"$build/dobudget" plan "$seed_dir/tiny.yaml" --out "$seed_dir/run" --threads 1 --quiet >/dev/null
"$build/dobudget" draw "$seed_dir/tiny.yaml" --out "$seed_dir/envs" >/dev/null
unset ASAN_OPTIONS
cp "$seed_dir"/envs/*.yaml "$corpus/fuzz_model_file/"
[ -d "$corpus/fuzz_runs_table" ] && cp "$seed_dir/run/runs.csv" "$corpus/fuzz_runs_table/"
[ -d "$corpus/fuzz_journal" ] && cp "$seed_dir/run/units.journal" "$corpus/fuzz_journal/"

status=0
for t in $targets; do
  dict=()
  case $t in fuzz_study_file | fuzz_model_file) dict=(-dict=tests/fuzz/yaml.dict) ;; esac
  echo "== $t: $runs executions (log: $logs/$t.log)"
  if ! "$build/fuzz/$t" "$corpus/$t" "${dict[@]}" -runs="$runs" -max_len=$max_len -timeout=$timeout \
       -rss_limit_mb=$rss_mb -artifact_prefix="$artifacts/$t-" -print_final_stats=1 > "$logs/$t.log" 2>&1; then
    echo "   FAILED: see $logs/$t.log and $artifacts/"
    status=1
  fi
  grep -E '^(Done|stat::number_of_executed_units|stat::average_exec_per_sec|stat::peak_rss_mb)' "$logs/$t.log" | sed 's/^/   /' || true
done
exit $status

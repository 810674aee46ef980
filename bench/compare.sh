#!/bin/bash
# Side-by-side timing of an earlier commit and the current tree (issue 11), on the same studies,
# in alternation within one run (a shared machine drifts: alternating spreads the drift over both).
# Usage: bash bench/compare.sh COMMIT [RUNS] [WORKDIR]
#   COMMIT   the earlier commit (e.g. d1c2e03); RUNS runs of each (default 5); WORKDIR for the builds
#            (default /tmp/dobudget-compare).
# Builds COMMIT from `git archive` (no checkout: the working tree is not touched) and the current
# tree, with the same flags. The current tree's bench/bench_em.cpp is built against both (it uses
# only the ForwardBackward API both have); bench_ghmm (GHMM's Baum-Welch step on a plain model of
# the reference size) is the outside yardstick, timed in the same run.
# Per item: median, min and max over the runs of user CPU seconds (and wall), and the ratio of the
# medians (old / new). Items: the default study, the reference-size preset, bench_em at the
# reference size and at the default study's sizes, bench_ghmm.
set -euo pipefail
commit=${1:?usage: compare.sh COMMIT [RUNS] [WORKDIR]}
runs=${2:-5}
work=${3:-/tmp/dobudget-compare}
here=$(cd "$(dirname "$0")/.." && pwd)
mkdir -p "$work"
old_src="$work/src-old"
rm -rf "$old_src" && mkdir -p "$old_src"  # (a folder of our own under WORKDIR)
git -C "$here" archive "$commit" | tar -x -C "$old_src"
cp "$here/bench/bench_em.cpp" "$old_src/bench/bench_em.cpp"
launcher=()
command -v ccache > /dev/null && launcher=(-DCMAKE_CXX_COMPILER_LAUNCHER=ccache)
# DOBUDGET_OLD_BUILD / DOBUDGET_NEW_BUILD: existing build folders to use instead (built from COMMIT
# with the current bench_em.cpp, and from the current tree, with `--target dobudget benchmarks`).
for side in old new; do
  src="$old_src"; [ "$side" = new ] && src="$here"
  given=${DOBUDGET_OLD_BUILD:-}; [ "$side" = new ] && given=${DOBUDGET_NEW_BUILD:-}
  if [ -n "$given" ]; then ln -sfn "$given" "$work/build-$side"; continue; fi
  cmake -S "$src" -B "$work/build-$side" -DCMAKE_BUILD_TYPE=Release -DDOBUDGET_TESTS=OFF "${launcher[@]}" > "$work/cmake-$side.log"
  cmake --build "$work/build-$side" -j2 --target dobudget benchmarks > "$work/build-$side.log"
done

# One timed command: appends "user wall" (seconds) to $work/times/ITEM-SIDE.
time_it() {
  local item=$1 side=$2
  shift 2
  /usr/bin/time -f "%U %e" -o "$work/times/tmp" "$@" >> "$work/times/$item-$side.out" 2>&1
  cat "$work/times/tmp" >> "$work/times/$item-$side"
}
rm -rf "$work/times" "$work/runs" && mkdir -p "$work/times" "$work/runs"
# The reference-size preset is 8 draws x 10 replicates (about 12 CPU minutes before issue 11);
# DOBUDGET_COMPARE_SMALL=1 times 1 draw x 2 replicates of it instead.
for side in old new; do
  src="$old_src"; [ "$side" = new ] && src="$here"
  ref="$src/configs/presets/reference-size.yaml"
  if [ "${DOBUDGET_COMPARE_SMALL:-0}" = 1 ]; then
    sed -e 's/^  draws: .*/  draws: 1/' -e 's/^replicates: .*/replicates: 2/' "$ref" > "$work/reference-$side.yaml"
  else
    cp "$ref" "$work/reference-$side.yaml"
  fi
done
for r in $(seq 1 "$runs"); do
  for side in old new; do
    b="$work/build-$side"
    src="$old_src"; [ "$side" = new ] && src="$here"
    time_it default "$side" "$b/dobudget" plan "$src/configs/default.yaml" --threads 1 --quiet --out "$work/runs/default-$side-$r"
    time_it reference "$side" "$b/dobudget" plan "$work/reference-$side.yaml" --threads 1 --quiet --out "$work/runs/reference-$side-$r"
    time_it bench_em "$side" "$b/bench_em" 60
    time_it bench_em_default "$side" "$b/bench_em" 400 1000 4 2 2 8
    # the same program in both slots (only the current tree has it): its spread is the machine's noise
    if [ -x "$work/build-new/bench_ghmm" ]; then time_it bench_ghmm "$side" "$work/build-new/bench_ghmm" 20; fi
  done
done

python3 - "$work/times" <<'PY'
import os, statistics, sys
d = sys.argv[1]
def load(name):
    p = os.path.join(d, name)
    if not os.path.exists(p): return None
    rows = [tuple(map(float, l.split())) for l in open(p) if l.strip()]
    return [r[0] for r in rows], [r[1] for r in rows]
print(f"{'item':18} {'old user s: median [min, max]':32} {'new user s: median [min, max]':32} {'ratio':>6}   wall medians old/new")
for item in ["default", "reference", "bench_em", "bench_em_default", "bench_ghmm"]:
    o, n = load(item + "-old"), load(item + "-new")
    if not o or not n: continue
    mo, mn = statistics.median(o[0]), statistics.median(n[0])
    f = lambda x: f"{statistics.median(x):.3f} [{min(x):.3f}, {max(x):.3f}]"
    print(f"{item:18} {f(o[0]):32} {f(n[0]):32} {mo / mn if mn > 0 else float('nan'):6.2f}   "
          f"{statistics.median(o[1]):.2f} / {statistics.median(n[1]):.2f}")
import re
print("per E-step + M-step, from the benchmarks' own output (cpu median ms of each run; median [min, max] over runs):")
for item in ["bench_em", "bench_em_default", "bench_ghmm"]:
    vals = {}
    for side in ["old", "new"]:
        p = os.path.join(d, f"{item}-{side}.out")
        if os.path.exists(p):
            vals[side] = [float(m) for m in re.findall(r"cpu median ([0-9.]+) ms", open(p).read())]
    if "old" in vals and "new" in vals and vals["old"] and vals["new"]:
        f = lambda x: f"{statistics.median(x):.3f} [{min(x):.3f}, {max(x):.3f}]"
        print(f"{item:18} old {f(vals['old']):28} new {f(vals['new']):28} ratio {statistics.median(vals['old']) / statistics.median(vals['new']):.2f}")
PY
echo "bench_em and bench_ghmm print per-iteration times themselves; their whole-program CPU above includes set-up."

#!/usr/bin/env bash
# A judgement of the shipped screening on fresh held-out regional draws (run by hand, not a test;
# docs/validation.md, *Regional screening*). Generates each master seed's held-out cases with no truth printed,
# then screens every case once under each condition, two processes at a time (the machine's two cores):
#   E0 no DEM error; E1, E5 1 m and 5 m of correlated DEM error, told; H each DEM resampled half a cell off its
#   grid; A the screening's own default channel area. With N set, the same draws also grown with slope exponent N
#   and screened untold (Nu), told N (Nt) and untold with the default channel area (NA).
# Writes OUT/<condition>-<seed>.{log,jsonl}; tests/benchmarks/judge_summary.py OUT tabulates them.
#
#   N=0.7 bash tests/benchmarks/judge_held_out.sh OUT 105 106 107 108
set -euo pipefail
out=$1; shift
mkdir -p "$out"
here=$(cd "$(dirname "$0")" && pwd)
bench="python $here/bench_regional.py --split held-out --markdown"
exponents="1${N:+ $N}"
jobs=()
for n in $exponents; do for s in "$@"; do
  jobs+=("$bench --slope-exponent $n --seed $s --generate-only --hide-truth > $out/gen-n$n-$s.log 2>&1")
done; done
printf '%s\n' "${jobs[@]}" | xargs -P 2 -I{} bash -c {}
jobs=()
for s in "$@"; do
  for c in "E0:" "E1:--dem-error 1" "E5:--dem-error 5" "H:--half-cell" "A:--auto-channel-area"; do
    jobs+=("$bench --seed $s ${c#*:} --json $out/${c%%:*}-$s.jsonl > $out/${c%%:*}-$s.log 2>&1")
  done
  if [ -n "${N:-}" ]; then
    for c in "u:" "t:--tell-n" "A:--auto-channel-area"; do
      name=N$N${c%%:*}-$s
      jobs+=("$bench --seed $s --slope-exponent $N ${c#*:} --json $out/$name.jsonl > $out/$name.log 2>&1")
    done
  fi
done
printf '%s\n' "${jobs[@]}" | xargs -P 2 -I{} bash -c {}

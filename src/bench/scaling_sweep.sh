#!/usr/bin/env bash
# How replay cost grows with the series count, the window length, the number
# of coefficients and the number of draws: runs replay_bench once per point
# and writes one CSV line per run. Not a test; docs/benchmarks.md ("How cost
# grows") has the figures and the plot made from them.
#
#   bash src/bench/scaling_sweep.sh BUILD_DIR OUT.csv [ROUNDS]
#   Rscript src/bench/scaling_plot.R OUT.csv docs/scaling.svg
#
# Each point varies one factor from the benchmark's default model (quadrature,
# window 365, 6 coefficients, 1,000 series) and is run at two refit settings:
# `every` refits before every judged record (the cost a rolling refit has),
# `recommended` is docs/config.md's speed setting (every 91st, a Newton step
# in between, refit on doubt at 10 alpha, cadence_from 60). Simulate points
# use 10,000 draws unless the draws are the factor.
#
# Columns: factor, value, setting, method, records, judged, wall seconds of
# the ingest loop, records/s, user CPU seconds of the whole process (feed
# generation included), user CPU nanoseconds per record. On a shared machine
# read the CPU column: the wall rate moves with other people's load, the CPU
# time much less. ROUNDS (default 1) repeats the whole sweep, points in the
# same order, so drift shows up as a spread between rounds.
set -euo pipefail

build=${1:?usage: scaling_sweep.sh BUILD_DIR OUT.csv [ROUNDS]}
out=${2:?usage: scaling_sweep.sh BUILD_DIR OUT.csv [ROUNDS]}
rounds=${3:-1}
bench="$build/replay_bench"
[[ -x "$bench" ]] || { echo "scaling_sweep: $bench not found; build the replay_bench target first" >&2; exit 1; }

recommended=(--doubt on --doubt-factor 10 --steps on --refit-every 91 --cadence-from 60)
every=(--refit-every 1)
log=$(mktemp)
trap 'rm -f "$log"' EXIT

echo "round,factor,value,setting,method,records,judged,seconds,records_per_s,user_s,user_ns_per_record" >"$out"

# run ROUND FACTOR VALUE SETTING METHOD ARGS...
run() {
  local round=$1 factor=$2 value=$3 setting=$4 method=$5
  shift 5
  local args=("$@")
  if [[ $setting == recommended ]]; then args+=("${recommended[@]}"); else args+=("${every[@]}"); fi
  /usr/bin/time -f "user %U" -o "$log.time" "$bench" --method "$method" --screen on "${args[@]}" >"$log" 2>&1 || {
    echo "scaling_sweep: replay_bench failed for $factor=$value $setting $method:" >&2
    cat "$log" >&2
    exit 1
  }
  # The result row: method screen refit threads records seconds records/s ratio judged alerts differ
  local row user
  row=$(awk -v m="$method" '$1 == m { print; exit }' "$log")
  user=$(awk '/^user/ { print $2 }' "$log.time")
  [[ -n $row && -n $user ]] || { echo "scaling_sweep: no result row for $factor=$value" >&2; cat "$log" >&2; exit 1; }
  read -r _ _ _ _ records seconds rate _ judged _ <<<"$row"
  local ns
  ns=$(awk -v u="$user" -v n="$records" 'BEGIN { printf "%.0f", u * 1e9 / n }')
  echo "$round,$factor,$value,$setting,$method,$records,$judged,$seconds,$rate,$user,$ns" >>"$out"
  echo "  $factor=$value $setting $method: $rate records/s, $ns ns CPU per record" >&2
}

for ((r = 1; r <= rounds; ++r)); do
  echo "round $r" >&2
  # Series count: the same 400 days each, so records grow with the series.
  for s in 100 1000 10000; do
    for setting in recommended every; do
      [[ $setting == every && $s -gt 1000 ]] && continue  # ~1 minute a point; the trend shows by 1,000
      run "$r" series "$s" "$setting" quadrature --series "$s" --days 400
    done
  done
  # Window length: 300 series, the feed 180 days longer than the window so
  # every series judges with a full window for the last half year.
  for w in 91 182 365 730; do
    for setting in recommended every; do
      run "$r" window "$w" "$setting" quadrature --series 300 --days $((w + 180)) --window "$w"
    done
  done
  # Coefficients: 1 to 3 annual harmonic pairs (6, 8, 10 coefficients).
  for h in 1 2 3; do
    for setting in recommended every; do
      run "$r" coefficients $((4 + 2 * h)) "$setting" quadrature --series 300 --days 545 --annual-harmonics "$h"
    done
  done
  # Draws (simulate): 300 series x 400 days at the recommended setting.
  for d in 1000 10000 100000; do
    run "$r" draws "$d" recommended simulate --series 300 --days 400 --draws "$d"
  done
done

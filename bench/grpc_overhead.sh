#!/usr/bin/env bash
# Overhead of the gRPC worker path versus the in-process path: wall time of the demo run
# (configs/demo.yaml) in four modes, each repeated R times (round-robin, so a change in machine
# load hits every mode alike):
#   inproc      chorus run --workers 0                (in process, compute.threads = all cores)
#   inproc-t1   chorus run --workers 0 --threads 1    (in process, one member at a time)
#   workers-1   chorus run --workers 1                (one local chorus-worker over gRPC)
#   workers-2   chorus run --workers 2                (two local chorus-workers over gRPC)
# Each mode's median wall time is printed with its ratio to inproc; workers-1 is also compared
# with inproc-t1 (both train one member at a time, so that ratio is the gRPC path's own cost).
# Usage: bench/grpc_overhead.sh [R (3)]   (from anywhere; builds chorus and writes the demo data
# under data/demo if missing). Environment: CHORUS_BUILD_DIR (default <repo>/build).
set -euo pipefail

repeats="${1:-3}"
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
build="${CHORUS_BUILD_DIR:-$root/build}"

# Configure and build quietly; show the log only if that fails.
if ! log="$( { [[ -f "$build/CMakeCache.txt" ]] || cmake -S "$root" -B "$build"; } 2>&1 &&
            cmake --build "$build" -j2 --target chorus chorus-worker chorus-demo-data 2>&1)"; then
  echo "$log" >&2
  exit 1
fi
[[ -f "$root/data/demo/alarms_train.csv" ]] || "$build/chorus-demo-data" "$root/data/demo" >/dev/null

tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
modes=(inproc inproc-t1 workers-1 workers-2)
declare -A args=([inproc]="--workers 0" [inproc-t1]="--workers 0 --threads 1"
                 [workers-1]="--workers 1" [workers-2]="--workers 2")

# Seconds one demo run takes in `mode`; exits the script if the run fails.
run_once() {
  local mode="$1" start end
  start="$(date +%s.%N)"
  # shellcheck disable=SC2086  # args holds several words on purpose
  if ! "$build/chorus" run "$root/configs/demo.yaml" --out "$tmp/runs" ${args[$mode]} \
      >"$tmp/log" 2>&1; then
    echo "chorus run ${args[$mode]} failed:" >&2
    cat "$tmp/log" >&2
    exit 1
  fi
  end="$(date +%s.%N)"
  rm -rf "$tmp/runs"
  awk -v a="$start" -v b="$end" 'BEGIN {printf "%.3f\n", b - a}'
}

# a / b, for printing.
ratio() { awk -v a="$1" -v b="$2" 'BEGIN {printf "%.2f", a / b}'; }

median() { sort -g | awk '{v[NR] = $1} END {print (NR % 2) ? v[(NR + 1) / 2] : (v[NR / 2] + v[NR / 2 + 1]) / 2}'; }

echo "machine: nproc=$(nproc) loadavg_before=\"$(cut -d' ' -f1-3 /proc/loadavg)\""
for ((r = 0; r < repeats; r++)); do
  for mode in "${modes[@]}"; do run_once "$mode" >>"$tmp/$mode.times"; done
done
declare -A med
for mode in "${modes[@]}"; do
  med[$mode]="$(median <"$tmp/$mode.times")"
  printf '%-10s median_s=%.3f ratio_to_inproc=%s runs_s=%s\n' "$mode" "${med[$mode]}" \
    "$(ratio "${med[$mode]}" "${med[inproc]}")" "$(paste -sd, "$tmp/$mode.times")"
done
echo "workers-1 / inproc-t1 = $(ratio "${med[workers-1]}" "${med[inproc-t1]}")" \
  "  (the gRPC path's own cost: both train one member at a time)"
echo "machine: loadavg_after=\"$(cut -d' ' -f1-3 /proc/loadavg)\""

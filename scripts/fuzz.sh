#!/usr/bin/env bash
# Builds the libFuzzer targets (tests/fuzz/, clang-14, ASan + UBSan) and fuzzes each on a copy of
# its seed corpus; then replays every input in tests/fuzz/regressions/<target>/ (inputs that once
# crashed a target; each must now pass).
#   scripts/fuzz.sh [--seconds N] [--jobs J] [--seed S] [--out DIR] [TARGET...]
#     --seconds N  fuzzing time per target (default 60; the README's figures used 1800)
#     --jobs J     targets fuzzed at once (default 1)
#     --seed S     libFuzzer's random seed (default: a new one each run); CI fixes it, so a
#                  failure there replays the same mutations
#     --out DIR    working corpora, logs and crash inputs (default build-fuzz/runs)
#     TARGET       csv idx config bundle result predict_input (default: all)
# Prints one line per target: seconds, executions, coverage (edges, features), corpus size, and
# whether it found a crash. Exits 1 if any target crashed or a regression input fails, 2 on bad
# usage. Build directory: $CHORUS_FUZZ_BUILD_DIR, default build-fuzz/ (CMake option CHORUS_FUZZ=ON).
set -euo pipefail
cd "$(dirname "$0")/.."
root="$(pwd)"
seconds=60
jobs=1
seed=0
out=""
targets=()
while [ $# -gt 0 ]; do
  case "$1" in
    --seconds) seconds="$2"; shift 2 ;;
    --jobs) jobs="$2"; shift 2 ;;
    --out) out="$2"; shift 2 ;;
    --seed) seed="$2"; shift 2 ;;
    -h|--help) sed -n '2,16p' "$0"; exit 0 ;;
    -*) echo "fuzz.sh: unknown option $1 (see --help)" >&2; exit 2 ;;
    *) targets+=("$1"); shift ;;
  esac
done
all=(csv idx config bundle result predict_input)
[ ${#targets[@]} -eq 0 ] && targets=("${all[@]}")
for t in "${targets[@]}"; do
  [ -d "tests/fuzz/corpus/$t" ] || { echo "fuzz.sh: no target $t (one of: ${all[*]})" >&2; exit 2; }
done
[[ "$seconds" =~ ^[0-9]+$ && "$jobs" =~ ^[1-9][0-9]*$ && "$seed" =~ ^[0-9]+$ ]] ||
  { echo "fuzz.sh: --seconds, --jobs and --seed take whole numbers" >&2; exit 2; }
build="${CHORUS_FUZZ_BUILD_DIR:-$root/build-fuzz}"
out="${out:-$build/runs}"

command -v clang++-14 >/dev/null || { echo "fuzz.sh: clang++-14 is missing (Debian: clang-14 libfuzzer-14-dev)" >&2; exit 2; }
# A build directory configured already with CHORUS_FUZZ=ON (setup.sh's build-asan/, which also
# holds the sanitized test suite) is used as it is; otherwise one with the fuzzers only is made.
if ! grep -q '^CHORUS_FUZZ:BOOL=ON$' "$build/CMakeCache.txt" 2>/dev/null; then
  CC=clang-14 CXX=clang++-14 cmake -S . -B "$build" -DCMAKE_BUILD_TYPE=Release -DCHORUS_FUZZ=ON \
    -DCHORUS_BUILD_TESTS=OFF -DCHORUS_BUILD_BENCH=OFF >/dev/null
fi
cmake --build "$build" -j "$(nproc)" --target chorus_fuzzers >/dev/null

# Runs one target; its summary line goes to $out/<target>/summary.
fuzz_one() {
  local t="$1" dir="$out/$1"
  rm -rf "$dir" && mkdir -p "$dir/corpus" "$dir/crashes"
  cp -r "tests/fuzz/corpus/$t/." "$dir/corpus/"
  local dict=()
  [ -f "tests/fuzz/$t.dict" ] && dict=(-dict="tests/fuzz/$t.dict")
  local start rc=0
  start=$(date +%s)
  "$build"/fuzz/"${t}_fuzzer" "${dict[@]}" -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 \
    -seed="$seed" -print_final_stats=1 -artifact_prefix="$dir/crashes/" "$dir/corpus" >"$dir/log" 2>&1 || rc=$?
  local execs cov ft crashes
  execs=$(grep -o 'stat::number_of_executed_units: *[0-9]*' "$dir/log" | grep -o '[0-9]*$' || echo 0)
  cov=$(grep -oE 'cov: [0-9]+ ft: [0-9]+' "$dir/log" | tail -1 || true)
  crashes=$(find "$dir/crashes" -type f | wc -l)
  printf '%-14s %6ss %12s executions  %-22s corpus %5s  %s\n' "$t" "$(( $(date +%s) - start ))" \
    "${execs:-0}" "${cov:-cov: ?}" "$(find "$dir/corpus" -type f | wc -l)" \
    "$([ "$rc" -eq 0 ] && [ "$crashes" -eq 0 ] && echo ok || echo "CRASH: $dir/crashes, log $dir/log")" \
    >"$dir/summary"
}

echo "fuzzing ${targets[*]} for ${seconds}s each, $jobs at a time (logs in $out)" >&2
running=0
for t in "${targets[@]}"; do
  fuzz_one "$t" &
  running=$((running + 1))
  if [ "$running" -ge "$jobs" ]; then wait -n || true; running=$((running - 1)); fi
done
wait
status=0
for t in "${targets[@]}"; do
  cat "$out/$t/summary"
  grep -q ' ok$' "$out/$t/summary" || status=1
  if [ -d "tests/fuzz/regressions/$t" ] && [ -n "$(ls -A "tests/fuzz/regressions/$t")" ]; then
    if ! "$build"/fuzz/"${t}_fuzzer" tests/fuzz/regressions/"$t"/* >"$out/$t/regressions.log" 2>&1; then
      echo "$t: a regression input fails again (log $out/$t/regressions.log)"
      status=1
    fi
  fi
done
exit "$status"

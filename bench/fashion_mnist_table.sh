#!/usr/bin/env bash
# Full Fashion-MNIST (Xiao et al. 2017, Debian dataset-fashion-mnist), 784-512-512-10: test
# accuracy, NLL and ECE for 1 member, 5 members, and 5 members with low-rank basin fits (S = 10),
# each before and after temperature, plus wall time. Prints a Markdown table.
# Usage: bench/fashion_mnist_table.sh [OUT_DIR]   (tens of minutes on 2 cores)
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
build="${CHORUS_BUILD_DIR:-$root/build}"
out="${1:-$root/runs/bench-fashion-mnist}"
mkdir -p "$out"
base="$root/configs/fashion_mnist.yaml"

variant() {  # NAME MEMBERS BASIN_YAML -> config path
  local cfg="$out/$1.yaml"
  sed -e "s/^  members: 5/  members: $2/" -e "s/^  min_members: 4/  min_members: 1/" \
      -e "s|^  weighting: uniform|  basin: $3\n  weighting: uniform|" "$base" >"$cfg"
  sed -i "s|^run: {name: fashion-mnist|run: {name: $1|" "$cfg"
  echo "$cfg"
}

row() {  # LABEL RUN_DIR SECONDS
  /usr/bin/python3 - "$1" "$2" "$3" <<'PY'
import json, sys
label, run, secs = sys.argv[1], sys.argv[2], float(sys.argv[3])
r = json.load(open(run + "/report.json"))
u, c = r["ensemble"]["test_uncalibrated"], r["ensemble"]["test"]
print(f"| {label} | {u['accuracy']:.4f} | {u['nll']:.4f} | {u['ece']:.4f} | {c['accuracy']:.4f} "
      f"| {c['nll']:.4f} | {c['ece']:.4f} | {r['temperature']:.3f} | {secs:.0f} |")
PY
}

echo "| ensemble | acc (T=1) | NLL (T=1) | ECE (T=1) | acc (tuned) | NLL (tuned) | ECE (tuned) | T | wall s |"
echo "| --- | --- | --- | --- | --- | --- | --- | --- | --- |"
for spec in "one-member 1 {method: none}" "five-members 5 {method: none}" \
            "five-lowrank 5 {method: gaussian_lowrank, epochs: 5, lr: 0.01, snapshots: 20, rank: 10, samples: 10}"; do
  read -r name members basin <<<"$spec"
  cfg="$(variant "$name" "$members" "$basin")"
  start=$(date +%s.%N)
  "$build/chorus" run "$cfg" --out "$out/runs" >"$out/$name.log" 2>&1
  secs=$(/usr/bin/python3 -c "print($(date +%s.%N) - $start)")
  run="$(ls -td "$out/runs/$name"-* | head -n 1)"
  row "$name" "$run" "$secs"
done

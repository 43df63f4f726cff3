#!/usr/bin/env bash
# Full Fashion-MNIST (Xiao et al. 2017, Debian dataset-fashion-mnist), 784-512-512-10: test
# accuracy, NLL and ECE for 1 member, 5 members, 5 members with low-rank basin fits (S = 10), 5
# members with last-layer Laplace fits (S = 20) and 5 members trained by cyclical SG-MCMC (SGHMC, 4
# cycles, 3 samples each), each before and after temperature, the AUROC of
# entropy and of mutual information for telling the test images rotated a quarter turn from the
# upright ones (data.shift_test), CPU-seconds of all jobs (report.json compute) and wall time.
# Prints a Markdown table. The five-member methods get equal epochs, so about equal CPU-seconds:
# 20 epochs each, the low-rank members 16 of training and 4 of their basin phase; the Laplace fit
# and the samples' predictions come on top (the CPU-seconds column shows how much).
# Usage: bench/fashion_mnist_table.sh [OUT_DIR [VARIANT...]]   (tens of minutes on 2 cores)
#   VARIANT: one-member five-members five-lowrank five-laplace five-cyclical eleven-members
#   (default: all; eleven plain members cost about what five cyclical SG-MCMC members do)
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
build="${CHORUS_BUILD_DIR:-$root/build}"
out="${1:-$root/runs/bench-fashion-mnist}"
mkdir -p "$out"
base="$root/configs/fashion_mnist.yaml"
shift 2>/dev/null || true
wanted=("$@")
rotated="$out/rotated-t10k-images-idx3-ubyte"
/usr/bin/python3 "$root/tests/reference/numpy_rotated_idx.py" \
  /usr/share/datasets/fashion-mnist/t10k-images-idx3-ubyte.gz 10000 "$rotated"

variant() {  # NAME MEMBERS BASIN_YAML EPOCHS -> config path
  local cfg="$out/$1.yaml"
  sed -e "s/^  members: 5/  members: $2/" -e "s/^  min_members: 4/  min_members: 1/" \
      -e "s/^  epochs: 20/  epochs: $4/" \
      -e "s|^  weighting: uniform|  basin: $3\n  weighting: uniform|" "$base" >"$cfg"
  sed -i "s|^run: {name: fashion-mnist|run: {name: $1|" "$cfg"
  sed -i "s|^  validation: {fraction: 0.1}|  validation: {fraction: 0.1}\n  shift_test: $rotated|" "$cfg"
  echo "$cfg"
}

row() {  # LABEL RUN_DIR SECONDS
  /usr/bin/python3 - "$1" "$2" "$3" <<'PY'
import json, sys
label, run, secs = sys.argv[1], sys.argv[2], float(sys.argv[3])
r = json.load(open(run + "/report.json"))
u, c = r["ensemble"]["test_uncalibrated"], r["ensemble"]["test"]
auroc = r["shift"]["predictives"][-1]["auroc"]
mi = f"{auroc['mutual_information']:.3f}" if "mutual_information" in auroc else "n/a"
cpu = r.get("compute", {}).get("cpu_seconds_all_jobs", float("nan"))
print(f"| {label} | {u['accuracy']:.4f} | {u['nll']:.4f} | {u['ece']:.4f} | {c['accuracy']:.4f} "
      f"| {c['nll']:.4f} | {c['ece']:.4f} | {r['temperature']:.3f} | {auroc['entropy']:.3f} | {mi} "
      f"| {cpu:.0f} | {secs:.0f} |")
PY
}

echo "| ensemble | acc (T=1) | NLL (T=1) | ECE (T=1) | acc (tuned) | NLL (tuned) | ECE (tuned) | T | rotated: AUROC entropy | AUROC MI | CPU-s | wall s |"
echo "| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |"
for spec in "one-member 1 20 {method: none}" "five-members 5 20 {method: none}" \
            "five-lowrank 5 16 {method: gaussian_lowrank, epochs: 4, lr: 0.01, snapshots: 20, rank: 10, samples: 10}" \
            "five-laplace 5 20 {method: laplace_last_layer, samples: 20}" \
            "five-cyclical 5 20 {method: cyclical_sgmcmc, cycles: 4, samples_per_cycle: 3}" \
            "eleven-members 11 20 {method: none}"; do
  read -r name members epochs basin <<<"$spec"
  if [ ${#wanted[@]} -gt 0 ] && [[ ! " ${wanted[*]} " =~ " $name " ]]; then continue; fi
  cfg="$(variant "$name" "$members" "$basin" "$epochs")"
  start=$(date +%s.%N)
  "$build/chorus" run "$cfg" --out "$out/runs" >"$out/$name.log" 2>&1
  secs=$(/usr/bin/python3 -c "print($(date +%s.%N) - $start)")
  run="$(ls -td "$out/runs/$name"-* | head -n 1)"
  row "$name" "$run" "$secs"
done

#!/usr/bin/env bash
# How close each posterior method comes to an HMC reference on a small open data set: for each
# method, `chorus run`, then `chorus reference` (full-batch HMC on the same network, training rows
# and weight-decay prior), and a Markdown table of top-1 agreement and mean total variation with
# the HMC predictive (Izmailov et al., ICML 2021), test NLL and accuracy, the HMC reference's own
# test NLL and R-hat (each run samples its own reference, from its own members' points, so the
# spread of that column shows the reference's Monte Carlo error), and the members' CPU-seconds.
# Data: scikit-learn's bundled breast_cancer (UCI Wisconsin diagnostic, Debian python3-sklearn),
# 75/25 split with seed 0 (tests/reference/sklearn_table_csv.py), 20% of train held out for
# validation; MLP 30-16-2 (530 parameters), 100 epochs of SGD at lr 0.01, momentum 0.9, batch 32,
# weight decay 1e-3 (the prior N(0, 1/(N x 1e-3)) for HMC), no early stopping.
# Methods: one member; 5 members; 5 with low-rank basin fits (S = 10); 5 with last-layer Laplace
# (S = 20); 5 trained by cyclical SG-MCMC (SGHMC, 4 cycles x 3 samples).
# Usage: bench/hmc_agreement.sh [OUT_DIR [METHOD...]]   (about 10 minutes on 2 cores)
#   METHOD: one-member five-members five-lowrank five-laplace five-cyclical (default: all)
# Environment: CHORUS_BUILD_DIR (default <repo>/build); CHORUS_HMC_ARGS (default
#   "--chains 4 --warmup 300 --draws 600 --thinning 2 --seed 1").
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
build="${CHORUS_BUILD_DIR:-$root/build}"
hmc_args="${CHORUS_HMC_ARGS:---chains 4 --warmup 300 --draws 600 --thinning 2 --seed 1}"
out="${1:-$root/runs/bench-hmc-agreement}"
shift 2>/dev/null || true
wanted=("$@")
mkdir -p "$out/data"
out="$(cd "$out" && pwd)"
/usr/bin/python3 "$root/tests/reference/sklearn_table_csv.py" breast_cancer "$out/data" 0 >/dev/null

config() {  # NAME MEMBERS BASIN_YAML -> config path
  local cfg="$out/$1.yaml"
  cat >"$cfg" <<YAML
run: {name: $1, seed: 1}
data: {train: data/breast_cancer_train.csv, test: data/breast_cancer_test.csv, target: target,
       task: classification, validation: {fraction: 0.2}}
model: {hidden: [16]}
train: {epochs: 100, batch_size: 32, early_stopping: {mode: off},
        optimizer: {lr: 0.01, momentum: 0.9, weight_decay: 1.0e-3}}
ensemble: {members: $2, min_members: 1, basin: $3}
YAML
  echo "$cfg"
}

row() {  # LABEL RUN_DIR
  /usr/bin/python3 - "$1" "$2" <<'PY'
import json, sys
label, run = sys.argv[1], sys.argv[2]
ref = json.load(open(run + "/hmc_reference.json"))
report = json.load(open(run + "/report.json"))
hmc, ens = ref["predictives"][0], ref["predictives"][1]
cpu = report.get("compute", {}).get("cpu_seconds_all_jobs", float("nan"))
print(f"| {label} | {ens['top1_agreement']:.4f} | {ens['mean_total_variation']:.4f} "
      f"| {ens['test']['nll']:.4f} | {ens['test']['accuracy']:.4f} | {hmc['test']['nll']:.4f} "
      f"| {ref['hmc']['max_r_hat']:.3f} | {cpu:.2f} |")
PY
}

echo "| method | agreement with HMC | TV to HMC | test NLL | accuracy | HMC test NLL | HMC max R-hat | members' CPU-s |"
echo "| --- | --- | --- | --- | --- | --- | --- | --- |"
for spec in "one-member 1 {method: none}" "five-members 5 {method: none}" \
            "five-lowrank 5 {method: gaussian_lowrank, epochs: 5, lr: 0.01, snapshots: 20, rank: 10, samples: 10}" \
            "five-laplace 5 {method: laplace_last_layer, samples: 20}" \
            "five-cyclical 5 {method: cyclical_sgmcmc, cycles: 4, samples_per_cycle: 3}"; do
  read -r name members basin <<<"$spec"
  if [ ${#wanted[@]} -gt 0 ] && [[ ! " ${wanted[*]} " =~ " $name " ]]; then continue; fi
  cfg="$(config "$name" "$members" "$basin")"
  "$build/chorus" run "$cfg" --out "$out/runs" >"$out/$name.log" 2>&1
  run="$(ls -td "$out/runs/$name"-* | head -n 1)"
  # shellcheck disable=SC2086
  "$build/chorus" reference "$run" $hmc_args >>"$out/$name.log" 2>&1
  row "$name" "$run"
done

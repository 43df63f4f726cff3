#!/usr/bin/env bash
# Peak resident memory of a chorus-worker training one member with a rank-20 low-rank basin fit on
# Fashion-MNIST (Debian's dataset-fashion-mnist) with the 784-512-512-10 network, against the
# target of issue 6:
#   bound = (rank + 4) x parameters x 4 bytes + the data + 64 MiB
# where "the data" is what the worker holds decoded: every split's features (rows x 784 float32)
# plus its labels (int32): data_bytes in the worker's "data set ... ready" log line.
#
# A real `chorus run` (coordinator, gRPC, one embedded worker process fetching the data over
# loopback, no disk cache yet) runs 1 member: 1 training epoch, 1 basin epoch with 20 snapshots,
# rank 20, 10 samples. The figure is the worker's own peak resident set (VmHWM), from the exit
# line it logs; the script also samples VmHWM from /proc every 0.2 s while it runs, as a check
# (it can miss a short peak at the end, never exceed the logged one).
#
# Usage: bench/worker_memory.sh [--no-build]   (~1 minute)
# Environment: CHORUS_BUILD_DIR (default <repo>/build). OPENBLAS_CORETYPE is left as it is and
# recorded. Output: comment lines starting with '#', then one line
#   worker-memory rank=20 params=P data_mib=D peak_rss_mib=M bound_mib=B met=yes|no
set -euo pipefail

root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
build="${CHORUS_BUILD_DIR:-$root/build}"
data_dir=/usr/share/datasets/fashion-mnist
rank=20
hidden=(512 512)
classes=10

if [[ ! -f "$data_dir/train-images-idx3-ubyte.gz" ]]; then
  echo "worker_memory.sh: $data_dir not found (apt-get install dataset-fashion-mnist)" >&2
  exit 2
fi
if [[ "${1:-}" != "--no-build" ]]; then
  if ! log="$( { [[ -f "$build/CMakeCache.txt" ]] || cmake -S "$root" -B "$build"; } 2>&1 &&
              cmake --build "$build" -j2 --target chorus chorus-worker 2>&1)"; then
    echo "$log" >&2
    exit 1
  fi
fi

tmp="$(mktemp -d)"
coordinator=""
cleanup() {
  if [[ -n "$coordinator" ]] && kill -0 "$coordinator" 2>/dev/null; then
    kill "$coordinator" 2>/dev/null || true  # its workers exit with it (--exit-with-parent)
    wait "$coordinator" 2>/dev/null || true
  fi
  rm -rf "$tmp"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

cat >"$tmp/config.yaml" <<EOF
run: {name: worker-memory, seed: 1, out_dir: $tmp/runs}
data:
  format: idx
  train: {images: $data_dir/train-images-idx3-ubyte.gz, labels: $data_dir/train-labels-idx1-ubyte.gz}
  test: {images: $data_dir/t10k-images-idx3-ubyte.gz, labels: $data_dir/t10k-labels-idx1-ubyte.gz}
  validation: {fraction: 0.1}
  task: classification
model: {hidden: [${hidden[0]}, ${hidden[1]}], activation: relu}
train:
  epochs: 1
  batch_size: 128
  optimizer: {kind: sgd, lr: 0.05, momentum: 0.9, nesterov: false, weight_decay: 5.0e-4}
  schedule: cosine
ensemble:
  members: 1
  min_members: 1
  basin: {method: gaussian_lowrank, epochs: 1, lr: 0.01, snapshots: 20, rank: $rank, samples: 10}
  weighting: uniform
  temperature: tune
cluster: {local_workers: 1}
EOF

load_before="$(cut -d' ' -f1-3 /proc/loadavg)"
start=$SECONDS
"$build/chorus" run "$tmp/config.yaml" --log-format json >"$tmp/stdout" 2>"$tmp/stderr" &
coordinator=$!
sampled_kib=0  # the largest VmHWM seen in /proc for the coordinator's worker children
while kill -0 "$coordinator" 2>/dev/null; do
  for pid in $(pgrep -P "$coordinator" -x chorus-worker || true); do
    kib="$(awk '/^VmHWM:/ {print $2}' "/proc/$pid/status" 2>/dev/null || true)"
    if [[ -n "$kib" && "$kib" -gt "$sampled_kib" ]]; then sampled_kib=$kib; fi
  done
  sleep 0.2
done
rc=0
wait "$coordinator" || rc=$?
coordinator=""
seconds=$((SECONDS - start))
if [[ $rc -ne 0 ]]; then
  echo "worker_memory.sh: chorus run exited with $rc" >&2
  tail -n 20 "$tmp/stderr" >&2
  exit 1
fi

log="$(cat "$tmp"/runs/worker-memory-*/worker.log)"
# Value of the JSON field KEY in the first log line that has it.
field() { { grep -o "\"$1\": *[0-9]*" <<<"$log" || true; } | head -n 1 | grep -o '[0-9]*$' || true; }
peak_bytes="$(field peak_rss_bytes)"
data_bytes="$(field data_bytes)"
features="$(field features)"
if [[ -z "$peak_bytes" || -z "$data_bytes" || -z "$features" ]]; then
  echo "worker_memory.sh: the worker log lacks its data or exit line (sampled VmHWM $sampled_kib KiB):" >&2
  echo "$log" >&2
  exit 1
fi

awk -v r="$rank" -v f="$features" -v h1="${hidden[0]}" -v h2="${hidden[1]}" -v c="$classes" \
    -v d="$data_bytes" -v m="$peak_bytes" -v s="$sampled_kib" -v t="$seconds" \
    -v core="${OPENBLAS_CORETYPE-unset}" -v lb="$load_before" \
    -v la="$(cut -d' ' -f1-3 /proc/loadavg)" 'BEGIN {
  mib = 1048576
  p = f * h1 + h1 + h1 * h2 + h2 + h2 * c + c
  bound = (r + 4) * p * 4 + d + 64 * mib
  printf "# network %d-%d-%d-%d, 1 member, 1 + 1 epochs, %d s; OPENBLAS_CORETYPE=%s\n", f, h1, h2, c, t, core
  printf "# load average (1/5/15 min): before %s, after %s\n", lb, la
  printf "# bound = (%d + 4) x %d x 4 B (%.1f MiB) + data %.1f MiB + 64 MiB\n", r, p, (r + 4) * p * 4 / mib, d / mib
  printf "# bound - peak: %.1f MiB; VmHWM sampled from /proc every 0.2 s: %.1f MiB\n",
         (bound - m) / mib, s / 1024
  printf "worker-memory rank=%d params=%d data_mib=%.1f peak_rss_mib=%.1f bound_mib=%.1f met=%s\n",
         r, p, d / mib, m / mib, bound / mib, m <= bound ? "yes" : "no"
}'

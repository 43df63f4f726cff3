#!/usr/bin/env bash
# One-command set-up for a fresh Debian 12 machine, run as root from anywhere:
#   scripts/setup.sh demo   install what is missing, build, write the invented demo data, run it
#   scripts/setup.sh test   the same, then the whole test suite (CTest) under the sanitizers,
#                           10 s of fuzzing per parser (scripts/fuzz.sh) and a half-minute chaos
#                           soak (scripts/chaos_soak.py)
# Idempotent: installed packages are skipped, the build is incremental.
set -euo pipefail
mode="${1:-demo}"
case "$mode" in demo|test) ;; *) echo "usage: $0 demo|test" >&2; exit 2 ;; esac
cd "$(dirname "$0")/.."

build_packages=(cmake ninja-build g++ pkg-config libtbb-dev libeigen3-dev libprotobuf-dev protobuf-compiler
  libgrpc++-dev protobuf-compiler-grpc libyaml-cpp-dev libcli11-dev nlohmann-json3-dev libssl-dev
  zlib1g-dev libgtest-dev libdnnl-dev)
# Reference libraries and open data the tests check against (scikit-learn, SciPy, PyTorch,
# Fashion-MNIST), headless Chromium for the report.html check, and for the deploy/ checks a real
# one-node Slurm cluster (slurm-wlm, munge), systemd-analyze (systemd) and PyYAML. OpenBLAS
# (libopenblas0-pthread) becomes PyTorch's BLAS in place of the reference BLAS, so that bench/run
# compares chorus with a peer at full speed. clang-14 with its runtime libraries (libFuzzer,
# sanitizers) builds the fuzz targets. python3-prometheus-client's parser checks the coordinator's
# metrics text. python3-onnx's checker validates `chorus export --onnx` files.
test_packages=(python3 python3-numpy python3-scipy python3-sklearn python3-torch dataset-fashion-mnist
  iproute2 openssl chromium slurm-wlm munge systemd python3-yaml libopenblas0-pthread clang-14
  libclang-rt-14-dev python3-prometheus-client python3-onnx)
wanted=("${build_packages[@]}")
[ "$mode" = test ] && wanted+=("${test_packages[@]}")

missing=()
for p in "${wanted[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ ${#missing[@]} -gt 0 ]; then
  if [ "$(id -u)" != 0 ]; then
    echo "missing Debian packages: ${missing[*]}; run this script as root to install them" >&2
    exit 2
  fi
  echo "installing: ${missing[*]}"
  apt-get update -qq
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${missing[@]}"
fi

jobs="$(nproc)"
# Ninja, and unity batches (CMakeLists.txt, CHORUS_UNITY_BUILD): measured on 2 cores, the ASan
# build takes 370 s instead of 580 s with make and one file per translation unit. A build
# directory made earlier keeps its generator.
configure() {
  local dir="$1"; shift
  local generator=(-G Ninja)
  [ -f "$dir/CMakeCache.txt" ] && generator=()
  cmake -S . -B "$dir" "${generator[@]}" -DCHORUS_UNITY_BUILD=ON "$@"
}
# In test mode the plain build holds only the tests that need it (below); the rest of the suite
# is built and run under the sanitizers.
# (The benchmarks are built in demo mode only: CI's 30 minutes go to the sanitizer builds.)
configure build -DCMAKE_BUILD_TYPE=Release -DCHORUS_PLAIN_ONLY_TESTS="$([ "$mode" = test ] && echo ON || echo OFF)" \
  -DCHORUS_BUILD_BENCH="$([ "$mode" = test ] && echo OFF || echo ON)"
cmake --build build -j "$jobs"

build/chorus-demo-data data/demo
build/chorus run configs/demo.yaml --out runs

if [ "$mode" = test ]; then
  # Every test runs once, in the build where it checks the most (README, "Tests, sanitizers,
  # fuzzing and the chaos soak"); only the concurrency tests run twice, once per sanitizer.
  # 1. The plain build: the tests no sanitizer can host (allocation counting replaces malloc) and
  #    the open-data quality checks (the code paths of smaller tests, on 10-100x their data).
  ctest --test-dir build --output-on-failure -j "$jobs" --timeout 900
  # 2. AddressSanitizer + UndefinedBehaviorSanitizer (clang): every other test, then the fuzz
  #    targets, which share this build.
  CC=clang-14 CXX=clang++-14 configure build-asan -DCMAKE_BUILD_TYPE=Release -DCHORUS_FUZZ=ON \
    -DCHORUS_BUILD_BENCH=OFF
  cmake --build build-asan -j "$jobs"
  ctest --test-dir build-asan --output-on-failure -j "$jobs" --timeout 900
  CHORUS_FUZZ_BUILD_DIR="$PWD/build-asan" scripts/fuzz.sh --seconds 10 --jobs "$jobs" --seed 1
  # 3. ThreadSanitizer: the concurrency tests (the job table, the coordinator's service, job slots
  #    on the oneTBB arena, training steps over threads, workers over gRPC, multi-threaded runs).
  CC=clang-14 CXX=clang++-14 configure build-tsan -DCMAKE_BUILD_TYPE=Release -DCHORUS_SANITIZE=thread \
    -DCHORUS_BUILD_BENCH=OFF
  cmake --build build-tsan -j "$jobs" --target chorus_tests
  TSAN_OPTIONS="halt_on_error=1 second_deadlock_stack=1 suppressions=$PWD/tests/sanitizers/tsan.supp" \
    ctest --test-dir build-tsan --output-on-failure -j "$jobs" --timeout 900
  # 4. The chaos soak, short: one round of 40 jobs under faults, checked against an undisturbed run.
  python3 scripts/chaos_soak.py --minutes 0.5 --members 40 --epochs 40 --seed 1 --skip-if-unable
fi

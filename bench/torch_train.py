"""PyTorch peer of chorus-bench-train (bench/train_throughput.cc), PyTorch 1.13 (Debian
python3-torch), one intra-op and one inter-op thread.

Same work: network 784-512-512-10 with relu (--network mlp), or with --network conv the
convolutional member of chorus-bench-train (the rows as 1 x 28 x 28 images; nn.Conv2d 3 x 3 with
padding 1 to 16 channels, relu, nn.MaxPool2d(2), the same to 32 channels, then 1568-128-10; the
convolutions go through oneDNN, PyTorch's default CPU path), batch BATCH, 8192 standard-normal rows with uniformly
random labels, cross-entropy, torch.optim.SGD (lr 0.05, momentum 0.9, weight decay 5e-4) with a
per-step CosineAnnealingLR, a fresh random permutation each epoch. One warm-up epoch, then
TIMED_EPOCHS timed ones.

Threads: torch.set_num_threads(1) holds PyTorch's own (OpenMP) threads to one, but not the threads
of the BLAS it calls; with Debian's libopenblas0-pthread that is OpenBLAS, whose thread count
comes from OPENBLAS_NUM_THREADS. The caller sets it (bench/run sets 1); this script reports what
OpenBLAS says it uses, so a run with more threads than chorus shows in the output.

Prints one line:
  torch pid=P batch=B samples=N start=S end=E samples_per_s=R torch=VERSION torch_threads=T
        openblas_threads=O malloc=default|tuned blas=PATH [network=conv]
where S and E are wall-clock seconds (time.time()) bounding the timed epochs, so that a caller
running several processes at once can divide all samples by the union of their windows; malloc
says whether glibc's MALLOC_MMAP_THRESHOLD_ was set in the environment (bench/run's "tuned" runs);
PATH is the BLAS library this process mapped (PyTorch's matrix products go through it).
Usage: torch_train.py [--batch B] [--timed-epochs E] [--seed S] [--network mlp|conv]
"""
import argparse
import ctypes
import os
import time

import torch
import torch.nn.functional as F
from torch import nn

ROWS, FEATURES, CLASSES = 8192, 784, 10
WARMUP_EPOCHS = 1


def loaded_blas():
    with open("/proc/self/maps") as maps:
        paths = {line.split()[-1] for line in maps if "blas" in line.rsplit("/", 1)[-1]}
    return sorted(paths)


def openblas_threads(paths):
    """Threads OpenBLAS will use, from the mapped library itself; 'none' without OpenBLAS."""
    for path in paths:
        if "openblas" in os.path.basename(path):
            lib = ctypes.CDLL(path)
            return str(lib.openblas_get_num_threads())
    return "none"


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--batch", type=int, default=128)
    parser.add_argument("--timed-epochs", type=int, default=3)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--network", choices=["mlp", "conv"], default="mlp")
    args = parser.parse_args()
    if args.batch < 1 or args.timed_epochs < 1:
        parser.error("--batch and --timed-epochs must be >= 1")

    torch.set_num_threads(1)
    torch.set_num_interop_threads(1)
    torch.manual_seed(args.seed)
    x = torch.randn(ROWS, FEATURES)
    y = torch.randint(0, CLASSES, (ROWS,))
    if args.network == "conv":
        x = x.reshape(ROWS, 1, 28, 28)
        net = nn.Sequential(nn.Conv2d(1, 16, 3, padding=1), nn.ReLU(), nn.MaxPool2d(2),
                            nn.Conv2d(16, 32, 3, padding=1), nn.ReLU(), nn.MaxPool2d(2),
                            nn.Flatten(), nn.Linear(32 * 7 * 7, 128), nn.ReLU(),
                            nn.Linear(128, CLASSES))
    else:
        net = nn.Sequential(nn.Linear(FEATURES, 512), nn.ReLU(), nn.Linear(512, 512), nn.ReLU(),
                            nn.Linear(512, CLASSES))
    opt = torch.optim.SGD(net.parameters(), lr=0.05, momentum=0.9, weight_decay=5e-4)
    batch = args.batch
    steps = (WARMUP_EPOCHS + args.timed_epochs) * ((ROWS + batch - 1) // batch)
    schedule = torch.optim.lr_scheduler.CosineAnnealingLR(opt, T_max=steps)

    def epoch():
        order = torch.randperm(ROWS)
        for start in range(0, ROWS, batch):
            rows = order[start:start + batch]
            opt.zero_grad(set_to_none=True)
            F.cross_entropy(net(x[rows]), y[rows]).backward()
            opt.step()
            schedule.step()

    for _ in range(WARMUP_EPOCHS):
        epoch()
    start = time.time()
    for _ in range(args.timed_epochs):
        epoch()
    end = time.time()
    samples = args.timed_epochs * ROWS
    blas = loaded_blas()
    malloc = "tuned" if "MALLOC_MMAP_THRESHOLD_" in os.environ else "default"
    print(f"torch pid={os.getpid()} batch={batch} samples={samples} start={start:.6f} "
          f"end={end:.6f} samples_per_s={samples / (end - start):.0f} torch={torch.__version__} "
          f"torch_threads={torch.get_num_threads()} openblas_threads={openblas_threads(blas)} "
          f"malloc={malloc} blas={','.join(blas) or 'none'}"
          + (" network=conv" if args.network == "conv" else ""))


if __name__ == "__main__":
    main()

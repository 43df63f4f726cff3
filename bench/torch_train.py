"""PyTorch peer of chorus-bench-train (bench/train_throughput.cc), PyTorch 1.13 (Debian
python3-torch), one intra-op and one inter-op thread.

Same work: network 784-512-512-10 with relu, batch 128, 8192 standard-normal rows with uniformly
random labels, cross-entropy, torch.optim.SGD (lr 0.05, momentum 0.9, weight decay 5e-4) with a
per-step CosineAnnealingLR, a fresh random permutation each epoch. One warm-up epoch, then
TIMED_EPOCHS timed ones. Prints one line:
  torch pid=P samples=N start=S end=E samples_per_s=R blas=PATH
where S and E are wall-clock seconds (time.time()) bounding the timed epochs, so that a caller
running several processes at once can divide all samples by the union of their windows, and PATH
is the BLAS library this process mapped (PyTorch's matrix products go through it).
Usage: torch_train.py [SEED]
"""
import os
import sys
import time

import torch
import torch.nn.functional as F
from torch import nn

ROWS, FEATURES, CLASSES, BATCH = 8192, 784, 10, 128
WARMUP_EPOCHS, TIMED_EPOCHS = 1, 3


def loaded_blas():
    with open("/proc/self/maps") as maps:
        paths = {line.split()[-1] for line in maps if "blas" in line.rsplit("/", 1)[-1]}
    return ",".join(sorted(paths)) or "none"


def main():
    torch.set_num_threads(1)
    torch.set_num_interop_threads(1)
    torch.manual_seed(int(sys.argv[1]) if len(sys.argv) > 1 else 0)
    x = torch.randn(ROWS, FEATURES)
    y = torch.randint(0, CLASSES, (ROWS,))
    net = nn.Sequential(nn.Linear(FEATURES, 512), nn.ReLU(), nn.Linear(512, 512), nn.ReLU(),
                        nn.Linear(512, CLASSES))
    opt = torch.optim.SGD(net.parameters(), lr=0.05, momentum=0.9, weight_decay=5e-4)
    steps = (WARMUP_EPOCHS + TIMED_EPOCHS) * ((ROWS + BATCH - 1) // BATCH)
    schedule = torch.optim.lr_scheduler.CosineAnnealingLR(opt, T_max=steps)

    def epoch():
        order = torch.randperm(ROWS)
        for start in range(0, ROWS, BATCH):
            rows = order[start:start + BATCH]
            opt.zero_grad(set_to_none=True)
            F.cross_entropy(net(x[rows]), y[rows]).backward()
            opt.step()
            schedule.step()

    for _ in range(WARMUP_EPOCHS):
        epoch()
    start = time.time()
    for _ in range(TIMED_EPOCHS):
        epoch()
    end = time.time()
    samples = TIMED_EPOCHS * ROWS
    print(f"torch pid={os.getpid()} samples={samples} start={start:.6f} end={end:.6f} "
          f"samples_per_s={samples / (end - start):.0f} blas={loaded_blas()}")


if __name__ == "__main__":
    main()

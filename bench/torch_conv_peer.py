#!/usr/bin/python3
"""The PyTorch 1.13 peer of configs/fashion_mnist_conv.yaml's members, for their accuracy.

Trains M members of the same network as the config (1 x 28 x 28 images; 3 x 3 convolutions with
"same" padding to 16 then 32 channels, each with relu and 2 x 2 max pooling; then 1568-128-10 with
relu), the same optimiser and schedule (SGD lr 0.05, momentum 0.9, weight decay 5e-4, cosine over
20 epochs, batch 128) on Fashion-MNIST as Debian's dataset-fashion-mnist ships it, with 10% of
the training rows held out and every pixel standardised on the rest, as chorus does. Prints each
member's test accuracy and NLL and those of their uniform average (temperature 1). PyTorch's own
default initialisation; one thread per process unless --threads says otherwise.

Usage: bench/torch_conv_peer.py [--members M (1)] [--epochs E (20)] [--seed S (0)]
"""
import argparse
import gzip
import math
import time

import numpy as np
import torch
import torch.nn.functional as F

DATA = "/usr/share/datasets/fashion-mnist/"


def read_idx(name):
    with gzip.open(DATA + name, "rb") as f:
        raw = f.read()
    dims = raw[3]
    shape = [int.from_bytes(raw[4 + 4 * i:8 + 4 * i], "big") for i in range(dims)]
    return np.frombuffer(raw, dtype=np.uint8, offset=4 + 4 * dims).reshape(shape)


def network():
    return torch.nn.Sequential(
        torch.nn.Conv2d(1, 16, 3, padding=1), torch.nn.ReLU(), torch.nn.MaxPool2d(2),
        torch.nn.Conv2d(16, 32, 3, padding=1), torch.nn.ReLU(), torch.nn.MaxPool2d(2),
        torch.nn.Flatten(), torch.nn.Linear(1568, 128), torch.nn.ReLU(), torch.nn.Linear(128, 10))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--members", type=int, default=1)
    parser.add_argument("--epochs", type=int, default=20)
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--threads", type=int, default=1)
    args = parser.parse_args()
    torch.set_num_threads(args.threads)

    x = read_idx("train-images-idx3-ubyte.gz").reshape(-1, 784).astype(np.float64)
    y = read_idx("train-labels-idx1-ubyte.gz").astype(np.int64)
    x_test = read_idx("t10k-images-idx3-ubyte.gz").reshape(-1, 784).astype(np.float64)
    y_test = read_idx("t10k-labels-idx1-ubyte.gz").astype(np.int64)
    order = np.random.default_rng(args.seed).permutation(len(x))
    train = order[len(x) // 10:]
    mean, std = x[train].mean(axis=0), x[train].std(axis=0)
    std[std == 0] = 1
    def prepare(rows):
        return torch.tensor(((rows - mean) / std).reshape(-1, 1, 28, 28), dtype=torch.float32)
    xt, yt = prepare(x[train]), torch.tensor(y[train])
    xs, ys = prepare(x_test), torch.tensor(y_test)

    probabilities = []
    for member in range(args.members):
        torch.manual_seed(args.seed * 1000 + member)
        net = network()
        opt = torch.optim.SGD(net.parameters(), lr=0.05, momentum=0.9, weight_decay=5e-4)
        steps_per_epoch = math.ceil(len(xt) / 128)
        schedule = torch.optim.lr_scheduler.CosineAnnealingLR(opt, args.epochs * steps_per_epoch)
        start = time.time()
        for epoch in range(args.epochs):
            perm = torch.randperm(len(xt))
            for b in range(steps_per_epoch):
                idx = perm[b * 128:(b + 1) * 128]
                opt.zero_grad()
                F.cross_entropy(net(xt[idx]), yt[idx]).backward()
                opt.step()
                schedule.step()
        with torch.no_grad():
            p = torch.cat([F.softmax(net(xs[i:i + 1000]), dim=1) for i in range(0, len(xs), 1000)])
        probabilities.append(p)
        acc = (p.argmax(1) == ys).double().mean().item()
        nll = F.nll_loss(torch.log(p.clamp_min(1e-300)), ys).item()
        print(f"torch_conv_peer member={member} epochs={args.epochs} test_accuracy={acc:.4f} "
              f"test_nll={nll:.4f} train_seconds={time.time() - start:.0f} torch={torch.__version__}",
              flush=True)
    p = torch.stack(probabilities).mean(0)
    acc = (p.argmax(1) == ys).double().mean().item()
    nll = F.nll_loss(torch.log(p.clamp_min(1e-300)), ys).item()
    print(f"torch_conv_peer ensemble members={args.members} test_accuracy={acc:.4f} test_nll={nll:.4f}")


if __name__ == "__main__":
    main()

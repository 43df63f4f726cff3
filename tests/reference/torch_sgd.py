"""chorus's optimizer pieces (common/sgd.h) computed with PyTorch 1.13 (Debian python3-torch).

Usage:
  torch_sgd.py sgd DIR MOMENTUM WEIGHT_DECAY NESTEROV
      DIR holds w0.txt (1 x n), grads.txt (steps x n) and lrs.txt (steps x 1). Runs
      torch.optim.SGD (float32, dampening 0) for `steps` steps, setting the group's lr to lrs[t]
      and the gradient to grads[t] before step t; writes weights.txt (steps x n), the weights
      after each step. NESTEROV is 0 or 1.
  torch_sgd.py cosine LR TOTAL
      torch.optim.lr_scheduler.CosineAnnealingLR(T_max=TOTAL, eta_min=0) on SGD(lr=LR); prints
      "lr VALUE" for steps 0..TOTAL (the rate in use before each scheduler.step()).
  torch_sgd.py clip DIR MAX_NORM SPLIT
      DIR holds g.txt (1 x n), split into two parameters at SPLIT; runs
      torch.nn.utils.clip_grad_norm_ over both (float32); writes clipped.txt (1 x n) and prints
      "norm VALUE" (the total norm before clipping).
"""
import os
import sys

import numpy as np
import torch

from matrix_text import print_value, read_matrix
from torch_mlp import write_matrix


def sgd(directory, momentum, weight_decay, nesterov):
    read = lambda name: read_matrix(os.path.join(directory, name))
    w = torch.nn.Parameter(torch.tensor(read("w0.txt")[0], dtype=torch.float32))
    grads, lrs = read("grads.txt"), read("lrs.txt")[:, 0]
    opt = torch.optim.SGD([w], lr=float(lrs[0]), momentum=momentum, dampening=0,
                          weight_decay=weight_decay, nesterov=nesterov)
    history = []
    for g, lr in zip(grads, lrs):
        opt.param_groups[0]["lr"] = float(lr)
        w.grad = torch.tensor(g, dtype=torch.float32)
        opt.step()
        history.append(w.detach().numpy().copy())
    write_matrix(os.path.join(directory, "weights.txt"), np.stack(history))


def cosine(lr, total):
    opt = torch.optim.SGD([torch.nn.Parameter(torch.zeros(1))], lr=lr)
    scheduler = torch.optim.lr_scheduler.CosineAnnealingLR(opt, T_max=total, eta_min=0)
    for _ in range(total + 1):
        print_value("lr", opt.param_groups[0]["lr"])
        opt.step()
        scheduler.step()


def clip(directory, max_norm, split):
    g = read_matrix(os.path.join(directory, "g.txt"))[0]
    params = [torch.nn.Parameter(torch.zeros(len(part))) for part in (g[:split], g[split:])]
    for p, part in zip(params, (g[:split], g[split:])):
        p.grad = torch.tensor(part, dtype=torch.float32)
    norm = torch.nn.utils.clip_grad_norm_(params, max_norm)
    clipped = np.concatenate([p.grad.numpy() for p in params])
    write_matrix(os.path.join(directory, "clipped.txt"), clipped)
    print_value("norm", norm.item())


def main():
    mode, args = sys.argv[1], sys.argv[2:]
    torch.set_num_threads(1)
    if mode == "sgd":
        sgd(args[0], float(args[1]), float(args[2]), args[3] == "1")
    elif mode == "cosine":
        cosine(float(args[0]), int(args[1]))
    elif mode == "clip":
        clip(args[0], float(args[1]), int(args[2]))
    else:
        sys.exit(f"unknown mode {mode}")


if __name__ == "__main__":
    main()

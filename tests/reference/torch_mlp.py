"""Forward and backward of chorus's Mlp (common/mlp.h) and heads (common/heads.h) in PyTorch.

Usage: torch_mlp.py DIR ACTIVATION HEAD [DIR ACTIVATION HEAD ...]
  Each DIR holds x.txt (rows x inputs), y.txt (rows x 1: class indices or regression targets), and
  for each layer l = 0, 1, ...: w<l>.txt (inputs x outputs, chorus's layout) and b<l>.txt (1 x
  outputs). ACTIVATION is relu | tanh | gelu; HEAD is softmax | gaussian.
For each dtype in (float64, float32) writes into DIR: <dtype>_outputs.txt (the last layer's
output), <dtype>_loss.txt (1 x 1, the batch-mean loss) and <dtype>_dw<l>.txt, <dtype>_db<l>.txt
(the loss gradient, in the same layouts as the weights).
Reference: PyTorch 1.13 (Debian python3-torch): nn.Linear, nn.ReLU / nn.Tanh / nn.GELU (exact erf
form), F.cross_entropy, F.gaussian_nll_loss(full=True) with variance exp(log-variance).
"""
import os
import sys

import numpy as np
import torch
import torch.nn.functional as F
from torch import nn

from matrix_text import read_matrix

ACTIVATIONS = {"relu": nn.ReLU, "tanh": nn.Tanh, "gelu": nn.GELU}


def write_matrix(path, m):
    """Writes m in the matrix text format of tests/testing/reference.h (shortest exact repr)."""
    m = np.atleast_2d(np.asarray(m, dtype=np.float64))
    with open(path, "w") as f:
        f.write(f"{m.shape[0]} {m.shape[1]}\n")
        for row in m:
            f.write(" ".join(repr(float(v)) for v in row) + "\n")


def read_layers(directory):
    layers = []
    while os.path.exists(os.path.join(directory, f"w{len(layers)}.txt")):
        l = len(layers)
        layers.append((read_matrix(os.path.join(directory, f"w{l}.txt")),
                       read_matrix(os.path.join(directory, f"b{l}.txt"))[0]))
    return layers


def build_network(layers, activation, dtype):
    modules = []
    for l, (w, b) in enumerate(layers):
        linear = nn.Linear(w.shape[0], w.shape[1]).to(dtype)
        with torch.no_grad():
            linear.weight.copy_(torch.tensor(w.T))  # nn.Linear stores out x in
            linear.bias.copy_(torch.tensor(b))
        modules.append(linear)
        if l + 1 < len(layers):
            modules.append(ACTIVATIONS[activation]())
    return nn.Sequential(*modules)


def head_loss(outputs, y, head):
    if head == "softmax":
        return F.cross_entropy(outputs, torch.tensor(y[:, 0].astype(np.int64)))
    target = torch.tensor(y[:, 0], dtype=outputs.dtype)
    return F.gaussian_nll_loss(outputs[:, 0], target, outputs[:, 1].exp(), full=True)


def run(directory, activation, head, dtype, name):
    layers = read_layers(directory)
    net = build_network(layers, activation, dtype)
    x = torch.tensor(read_matrix(os.path.join(directory, "x.txt")), dtype=dtype)
    outputs = net(x)
    loss = head_loss(outputs, read_matrix(os.path.join(directory, "y.txt")), head)
    loss.backward()
    out = lambda suffix: os.path.join(directory, f"{name}_{suffix}.txt")
    write_matrix(out("outputs"), outputs.detach().numpy())
    write_matrix(out("loss"), [[loss.item()]])
    linears = [m for m in net if isinstance(m, nn.Linear)]
    for l, linear in enumerate(linears):
        write_matrix(out(f"dw{l}"), linear.weight.grad.numpy().T)
        write_matrix(out(f"db{l}"), linear.bias.grad.numpy())


def main():
    torch.set_num_threads(1)
    args = sys.argv[1:]
    for directory, activation, head in zip(args[0::3], args[1::3], args[2::3]):
        run(directory, activation, head, torch.float64, "float64")
        run(directory, activation, head, torch.float32, "float32")


if __name__ == "__main__":
    main()

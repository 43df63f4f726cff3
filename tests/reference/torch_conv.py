"""Forward and backward of a chorus network with a convolutional front (common/conv_front.h,
common/mlp.h) in PyTorch.

Usage: torch_conv.py DIR [DIR ...]
  Each DIR holds spec.txt, params.txt (1 x P, chorus's flat parameter vector), x.txt (rows x
  C*H*W, channel-major rows) and y.txt (rows x 1: class indices or regression targets).
  spec.txt lines: "C H W ACTIVATION HEAD" (relu|tanh|gelu, softmax|gaussian); one line per stage
  "CHANNELS KERNEL POOL" (none|max|average); a last line "dense W0 W1 ... WL" (the dense widths).
For each dtype in (float64, float32) writes into DIR: <dtype>_outputs.txt, <dtype>_loss.txt (1 x 1)
and <dtype>_grad.txt (1 x P, dL/dparams in chorus's layout).
The layout, from the headers: per stage the kernel as a (k k C_in) x C_out matrix whose row
(dy k + dx) C_in + c is input channel c at offset (dy, dx), then the bias; the front's output row
is height x width x channels (channels fastest); then per dense layer W (in x out) and b.
Reference: PyTorch 1.13 (Debian python3-torch): F.conv2d (padding k // 2), F.max_pool2d /
F.avg_pool2d (2, stride 2), F.linear, F.relu / torch.tanh / F.gelu (exact erf form),
F.cross_entropy, F.gaussian_nll_loss(full=True) with variance exp(log-variance), autograd.
"""
import os
import sys

import numpy as np
import torch
import torch.nn.functional as F

from matrix_text import read_matrix, write_matrix

ACTIVATIONS = {"relu": F.relu, "tanh": torch.tanh, "gelu": F.gelu}


def read_spec(directory):
    with open(os.path.join(directory, "spec.txt")) as f:
        lines = [line.split() for line in f if line.strip()]
    c, h, w, activation, head = lines[0]
    stages = [(int(ch), int(k), pool) for ch, k, pool in lines[1:-1]]
    dense = [int(v) for v in lines[-1][1:]]
    return (int(c), int(h), int(w)), activation, head, stages, dense


def split_params(flat, image, stages, dense, dtype):
    """Cuts the flat vector into torch tensors (leaf tensors that collect gradients) and returns
    them with a function that maps their gradients back into the flat layout."""
    tensors, layout = [], []
    offset = 0
    c_in = image[0]
    for channels, k, _ in stages:
        rows = k * k * c_in
        kernel = flat[offset:offset + rows * channels].reshape(k, k, c_in, channels)
        offset += rows * channels
        bias = flat[offset:offset + channels]
        offset += channels
        # chorus (dy, dx, c, o) -> torch (o, c, dy, dx)
        tensors += [torch.tensor(kernel.transpose(3, 2, 0, 1).copy(), dtype=dtype, requires_grad=True),
                    torch.tensor(bias, dtype=dtype, requires_grad=True)]
        layout += ["kernel", "bias"]
        c_in = channels
    for l in range(len(dense) - 1):
        n_in, n_out = dense[l], dense[l + 1]
        weight = flat[offset:offset + n_in * n_out].reshape(n_in, n_out)
        offset += n_in * n_out
        bias = flat[offset:offset + n_out]
        offset += n_out
        tensors += [torch.tensor(weight.T.copy(), dtype=dtype, requires_grad=True),
                    torch.tensor(bias, dtype=dtype, requires_grad=True)]
        layout += ["weight", "bias"]
    assert offset == flat.size, (offset, flat.size)

    def flat_gradient():
        parts = []
        for kind, t in zip(layout, tensors):
            g = t.grad.detach().numpy()
            if kind == "kernel":
                parts.append(g.transpose(2, 3, 1, 0).reshape(-1))
            elif kind == "weight":
                parts.append(g.T.reshape(-1))
            else:
                parts.append(g.reshape(-1))
        return np.concatenate(parts)

    return tensors, flat_gradient


def forward(x, image, activation, stages, dense, tensors):
    act = ACTIVATIONS[activation]
    h = x.reshape(x.shape[0], *image)
    t = 0
    for channels, k, pool in stages:
        h = act(F.conv2d(h, tensors[t], tensors[t + 1], padding=k // 2))
        t += 2
        if pool == "max":
            h = F.max_pool2d(h, 2, 2)
        elif pool == "average":
            h = F.avg_pool2d(h, 2, 2)
    h = h.permute(0, 2, 3, 1).reshape(h.shape[0], -1)  # height x width x channels per row
    layers = len(dense) - 1
    for l in range(layers):
        h = F.linear(h, tensors[t], tensors[t + 1])
        t += 2
        if l + 1 < layers:
            h = act(h)
    return h


def head_loss(outputs, y, head):
    if head == "softmax":
        return F.cross_entropy(outputs, torch.tensor(y[:, 0].astype(np.int64)))
    target = torch.tensor(y[:, 0], dtype=outputs.dtype)
    return F.gaussian_nll_loss(outputs[:, 0], target, outputs[:, 1].exp(), full=True)


def run(directory, dtype, name):
    image, activation, head, stages, dense = read_spec(directory)
    flat = read_matrix(os.path.join(directory, "params.txt"))[0]
    tensors, flat_gradient = split_params(flat, image, stages, dense, dtype)
    x = torch.tensor(read_matrix(os.path.join(directory, "x.txt")), dtype=dtype)
    outputs = forward(x, image, activation, stages, dense, tensors)
    loss = head_loss(outputs, read_matrix(os.path.join(directory, "y.txt")), head)
    loss.backward()
    out = lambda suffix: os.path.join(directory, f"{name}_{suffix}.txt")
    write_matrix(out("outputs"), outputs.detach().numpy())
    write_matrix(out("loss"), np.array([[loss.item()]]))
    write_matrix(out("grad"), flat_gradient()[None, :])


def main():
    torch.set_num_threads(1)
    for directory in sys.argv[1:]:
        run(directory, torch.float64, "float64")
        run(directory, torch.float32, "float32")


if __name__ == "__main__":
    main()

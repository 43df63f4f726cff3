"""bfloat16 rounding computed with PyTorch 1.13 (Debian python3-torch), for chorus's bf16 products
(common/gemm.h, ProductPrecision::kBf16).

Usage:
  torch_bf16.py round IN OUT
      IN holds a 1 x n matrix of float32 values (tests/testing/reference.h text format); writes OUT,
      1 x n, each value converted with Tensor.to(torch.bfloat16) (round to nearest even) and back
      to float, exactly.
"""
import sys

import numpy as np
import torch

from matrix_text import read_matrix, write_matrix


def round_values(path_in, path_out):
    x = torch.tensor(read_matrix(path_in)[0], dtype=torch.float64).to(torch.float32)
    rounded = x.to(torch.bfloat16).to(torch.float64).numpy()
    write_matrix(path_out, rounded.reshape(1, -1))


if __name__ == "__main__":
    if len(sys.argv) == 4 and sys.argv[1] == "round":
        round_values(sys.argv[2], sys.argv[3])
    else:
        sys.exit(__doc__)

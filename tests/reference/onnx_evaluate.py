"""Checks and evaluates an ONNX model written by `chorus export --onnx`, independently of chorus.

Usage: onnx_evaluate.py MODEL.onnx INPUT.csv

1. onnx.checker.check_model(model, full_check=True) from Debian's python3-onnx: the file is a
   valid ONNX model (schema, operator set, types and shapes inferred end to end).
2. The graph is run by a small interpreter written here over NumPy: one function per operator
   type the graph uses, following the ONNX operator specifications (onnx.ai/onnx/operators),
   with no ONNX runtime and no onnx.reference.
3. The input "features" is built from INPUT.csv by the contract the model's metadata states:
   for each name in metadata feature_names, a column of that name gives its value; a name
   "COLUMN=VALUE" gives 1.0 where the row's COLUMN equals VALUE, else 0.0. Values are float32.

Prints "rows N", then every graph output as "NAME v ..." (row-major), and "nodes N".
"""
import csv
import json
import sys

import numpy as np
import onnx
from scipy.special import erf

ELEMENT_TYPES = {1: np.float32, 7: np.int64, 11: np.float64}


def tensor_value(t):
    """An initializer's values, from the typed field its data_type selects (or raw_data)."""
    dtype = ELEMENT_TYPES[t.data_type]
    if t.raw_data:
        values = np.frombuffer(t.raw_data, dtype=np.dtype(dtype).newbyteorder("<"))
    elif t.data_type == 1:
        values = np.array(t.float_data, dtype=np.float32)
    elif t.data_type == 7:
        values = np.array(t.int64_data, dtype=np.int64)
    else:
        values = np.array(t.double_data, dtype=np.float64)
    return values.astype(dtype).reshape(tuple(t.dims))


def attributes(node):
    out = {}
    for a in node.attribute:
        if a.type == onnx.AttributeProto.INT:
            out[a.name] = a.i
        elif a.type == onnx.AttributeProto.INTS:
            out[a.name] = list(a.ints)
        elif a.type == onnx.AttributeProto.FLOAT:
            out[a.name] = a.f
        else:
            raise ValueError(f"{node.name}: attribute {a.name} of unsupported type {a.type}")
    return out


# --- one function per operator: (inputs, attributes) -> output --------------------------------

def op_cast(x, at):
    return x.astype(ELEMENT_TYPES[at["to"]])


def op_add(a, b, at):
    return a + b


def op_sub(a, b, at):
    return a - b


def op_mul(a, b, at):
    return a * b


def op_div(a, b, at):
    return a / b


def op_relu(x, at):
    return np.maximum(x, x.dtype.type(0))


def op_tanh(x, at):
    return np.tanh(x)


def op_erf(x, at):
    return erf(x).astype(x.dtype)


def op_exp(x, at):
    return np.exp(x)


def op_gemm(a, b, c, at):
    """Y = alpha A' B' + beta C, A' = A or A^T (transA), B' likewise."""
    a = a.T if at.get("transA", 0) else a
    b = b.T if at.get("transB", 0) else b
    alpha = a.dtype.type(at.get("alpha", 1.0))
    beta = a.dtype.type(at.get("beta", 1.0))
    return alpha * (a @ b) + beta * c


def op_reshape(x, shape, at):
    """A 0 copies the input's dimension (allowzero 0); one -1 is inferred."""
    target = [x.shape[i] if d == 0 else int(d) for i, d in enumerate(shape)]
    return x.reshape(target)


def op_conv(x, w, b, at):
    """Cross-correlation: Y[n, m, y, x] = B[m] + sum_{c, i, j} W[m, c, i, j] Xpad[n, c, y s + i, x s + j]."""
    assert at.get("group", 1) == 1 and at.get("dilations", [1, 1]) == [1, 1]
    kh, kw = w.shape[2], w.shape[3]
    pads = at.get("pads", [0, 0, 0, 0])
    sy, sx = at.get("strides", [1, 1])
    xp = np.pad(x, ((0, 0), (0, 0), (pads[0], pads[2]), (pads[1], pads[3])))
    out_h = (xp.shape[2] - kh) // sy + 1
    out_w = (xp.shape[3] - kw) // sx + 1
    y = np.zeros((x.shape[0], w.shape[0], out_h, out_w), dtype=x.dtype)
    for i in range(kh):
        for j in range(kw):
            window = xp[:, :, i:i + sy * out_h:sy, j:j + sx * out_w:sx]  # n, c, y, x
            y += np.einsum("ncyx,mc->nmyx", window, w[:, :, i, j])
    return y + b.reshape(1, -1, 1, 1)


def pool_windows(x, at):
    """Every kernel offset's strided view: the windows of a pool without padding, floor mode."""
    assert at.get("ceil_mode", 0) == 0 and at.get("pads", [0, 0, 0, 0]) == [0, 0, 0, 0]
    kh, kw = at["kernel_shape"]
    sy, sx = at.get("strides", [1, 1])
    out_h = (x.shape[2] - kh) // sy + 1
    out_w = (x.shape[3] - kw) // sx + 1
    return [x[:, :, i:i + sy * out_h:sy, j:j + sx * out_w:sx] for i in range(kh) for j in range(kw)]


def op_maxpool(x, at):
    return np.max(np.stack(pool_windows(x, at)), axis=0)


def op_averagepool(x, at):
    windows = pool_windows(x, at)
    return (np.sum(np.stack(windows), axis=0) / x.dtype.type(len(windows))).astype(x.dtype)


def op_transpose(x, at):
    return np.transpose(x, at.get("perm"))


def op_flatten(x, at):
    axis = at.get("axis", 1)
    return x.reshape(int(np.prod(x.shape[:axis], dtype=np.int64)), -1)


def op_unsqueeze(x, axes, at):
    rank = x.ndim + len(axes)
    for a in sorted(int(a) % rank for a in axes):
        x = np.expand_dims(x, a)
    return x


def op_concat(*args):
    *parts, at = args
    return np.concatenate(parts, axis=at["axis"])


def op_softmax(x, at):
    """Opset 13: exp(x - max) / sum exp(x - max) along `axis` (default -1)."""
    axis = at.get("axis", -1)
    e = np.exp(x - np.max(x, axis=axis, keepdims=True))
    return e / np.sum(e, axis=axis, keepdims=True)


def op_reducesum(x, axes, at):
    return np.sum(x, axis=tuple(int(a) for a in axes), keepdims=bool(at.get("keepdims", 1)))


def op_gather(x, indices, at):
    return np.take(x, indices, axis=at.get("axis", 0))


OPERATORS = {
    "Cast": op_cast, "Add": op_add, "Sub": op_sub, "Mul": op_mul, "Div": op_div,
    "Relu": op_relu, "Tanh": op_tanh, "Erf": op_erf, "Exp": op_exp, "Gemm": op_gemm,
    "Reshape": op_reshape, "Conv": op_conv, "MaxPool": op_maxpool,
    "AveragePool": op_averagepool, "Transpose": op_transpose, "Flatten": op_flatten,
    "Unsqueeze": op_unsqueeze, "Concat": op_concat, "Softmax": op_softmax,
    "ReduceSum": op_reducesum, "Gather": op_gather,
}


def run_graph(graph, feeds):
    values = {t.name: tensor_value(t) for t in graph.initializer}
    values.update(feeds)
    for node in graph.node:
        if node.domain not in ("", "ai.onnx"):
            raise ValueError(f"{node.name}: operator domain {node.domain!r}")
        if node.op_type not in OPERATORS:
            raise ValueError(f"{node.name}: no evaluator for operator {node.op_type}")
        args = [values[name] for name in node.input]
        (out,) = node.output
        values[out] = OPERATORS[node.op_type](*args, attributes(node))
    return {o.name: values[o.name] for o in graph.output}


def encode_features(path, feature_names):
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    header, records = rows[0], [r for r in rows[1:] if r]
    column = {name: i for i, name in enumerate(header)}
    x = np.zeros((len(records), len(feature_names)), dtype=np.float32)
    for j, name in enumerate(feature_names):
        if name in column:
            x[:, j] = [np.float32(float(r[column[name]])) for r in records]
        else:
            source, value = name.split("=", 1)
            x[:, j] = [1.0 if r[column[source]] == value else 0.0 for r in records]
    return x


def main():
    model = onnx.load(sys.argv[1])
    onnx.checker.check_model(model, full_check=True)
    metadata = {p.key: p.value for p in model.metadata_props}
    features = encode_features(sys.argv[2], json.loads(metadata["feature_names"]))
    (graph_input,) = model.graph.input
    outputs = run_graph(model.graph, {graph_input.name: features})
    print("rows", features.shape[0])
    for name, value in outputs.items():
        print(name, " ".join(repr(float(v)) for v in np.ravel(value)))
    print("nodes", len(model.graph.node))


if __name__ == "__main__":
    main()

"""Tables of one bench/run measurement beside the issue-6 targets; optionally writes them into
BENCHMARKS.md, replacing what lies between its markers (BEGIN and END below).

Input: the lines bench/run recorded, one measurement each: a kind, then KEY=VALUE fields (a value
with spaces in double quotes), every line ending in load_before=L load_after=L (1-minute load
averages around it). Kinds read here: machine, gemm-machine, gemm-limit, gemm-sequence, chorus,
chorus-step, torch, chorus-predict, worker-memory; every line also goes into the raw listing at the end.
GEMM-limit and chorus lines may carry round=R: bench/run measures that pair several times, and
each figure is the median over rounds, each ratio of the two the median of the within-round ratios
(a line without a round is round 1).
Every "met" is computed from the figures; a figure the run did not produce reads "not measured".
Usage: report.py RAW_FILE [--markdown BENCHMARKS.md]
"""
import argparse
import shlex
import statistics
import sys

BEGIN = "<!-- bench/run:begin -->"
END = "<!-- bench/run:end -->"
# chorus-bench-predict's bundle (bench/predict_throughput.cc): 8 members x 10 basin samples, so
# each input row costs 80 network evaluations, "member-sample-rows".
PREDICT_NETWORKS_PER_ROW = 80


def parse(lines):
    """[(kind, fields, line)] for the non-empty lines."""
    records = []
    for line in lines:
        line = line.strip()
        if not line:
            continue
        try:
            words = shlex.split(line)
        except ValueError:  # an unbalanced quote in a free-text line: keep it as plain words
            words = line.split()
        fields = dict(w.split("=", 1) for w in words[1:] if "=" in w)
        records.append((words[0], fields, line))
    return records


def select(records, kind, **match):
    return [f for k, f, _ in records
            if k == kind and all(f.get(key) == str(v) for key, v in match.items())]


def num(fields, key):
    return float(fields[key]) if fields and key in fields else None


def union_rate(runs):
    """All timed samples over the union of the timed windows of processes run at once."""
    if not runs:
        return None
    samples = sum(float(r["samples"]) for r in runs)
    start = min(float(r["start"]) for r in runs)
    end = max(float(r["end"]) for r in runs)
    return samples / (end - start)


def loads(*groups):
    values = [float(f[k]) for g in groups for f in g
              for k in ("load_before", "load_after") if k in f]
    if not values:
        return "?"
    lo, hi = min(values), max(values)
    return f"{lo:.2f}" if lo == hi else f"{lo:.2f}-{hi:.2f}"


def rate(x):
    return "not measured" if x is None else f"{x:,.0f}"


def ratio(a, b):
    return None if a is None or b is None else a / b


def median(values):
    values = [v for v in values if v is not None]
    return statistics.median(values) if values else None


def spread(values):
    """' (lo-hi over N rounds)' for more than one value, else ''."""
    values = [v for v in values if v is not None]
    if len(values) < 2:
        return ""
    return f" ({min(values):,.0f}-{max(values):,.0f} over {len(values)} rounds)"


def is_fp32(f):
    """Whether a record measures fp32 products: the GEMM limit and the fp32 training rates leave
    out the bfloat16 backends and runs (backend NAME_bf16, products=bf16)."""
    return not f.get("backend", "").endswith("_bf16") and f.get("products", "fp32") == "fp32"


def round_of(fields):
    return fields.get("round", "1")


def times(x):
    return "not measured" if x is None else f"{x:.2f}x"


def table(header, rows):
    out = ["| " + " | ".join(header) + " |", "|" + " --- |" * len(header)]
    out += ["| " + " | ".join(str(c) for c in row) + " |" for row in rows]
    return "\n".join(out)


class Report:
    def __init__(self, records):
        self.records = records
        self.machine = (select(records, "machine") or [{}])[0]
        self.gemm_machine = (select(records, "gemm-machine") or [{}])[0]
        self.batches = sorted({int(f["batch"]) for f in select(records, "gemm-limit")} |
                              {int(f["batch"]) for f in select(records, "chorus")})
        self.targets = []  # (what, measured text, required text, met: True / False / None)

    def target(self, what, value, required, fmt):
        """Records a target (value >= required) and returns the figure with it, for a cell."""
        met = None if value is None else value >= required
        verdict = {None: "not measured", True: "met", False: "**not met**"}[met]
        self.targets.append((what, "not measured" if value is None else fmt(value),
                             f">= {fmt(required)}", verdict))
        shown = "not measured" if value is None else fmt(value)
        return f"{shown} (target {fmt(required)}: {verdict})" if value is not None else shown

    # --- figures ---

    def sequence(self, batch):
        """{backend: median over rounds of the back-to-back rate} at this batch."""
        out = {}
        for f in select(self.records, "gemm-sequence", batch=batch):
            if is_fp32(f):
                out.setdefault(f["backend"], []).append(float(f["samples_per_s"]))
        return {name: median(rates) for name, rates in out.items()}

    def sequence_in(self, batch, rnd):
        """The faster back-to-back rate of one round, or None."""
        return max((float(f["samples_per_s"]) for f in select(self.records, "gemm-sequence",
                                                                batch=batch)
                    if round_of(f) == rnd and is_fp32(f)), default=None)

    def rounds(self, batch):
        return sorted({round_of(f) for kind in ("gemm-limit", "chorus")
                       for f in select(self.records, kind, batch=batch)}, key=int)

    def gemm(self, batch, rnd=None):
        """{backend: [gemm-limit fields, one per round]} at this batch (one round if rnd given)."""
        out = {}
        for f in select(self.records, "gemm-limit", batch=batch):
            if (rnd is None or round_of(f) == rnd) and is_fp32(f):
                out.setdefault(f["backend"], []).append(f)
        return out

    def limit_in(self, batch, rnd):
        """The GEMM limit of one round: the fastest backend on the step's products; (rate, name)."""
        best = max((f for fs in self.gemm(batch, rnd).values() for f in fs),
                   key=lambda f: float(f["samples_per_s"]), default=None)
        return (None, None) if best is None else (float(best["samples_per_s"]), best["backend"])

    def limit(self, batch):
        """(median over rounds of the limit, the backends that gave it, the per-round limits)."""
        per_round = [self.limit_in(batch, r) for r in self.rounds(batch)]
        rates = [x for x, _ in per_round if x is not None]
        backends = "/".join(sorted({name for _, name in per_round if name is not None}))
        return median(rates), backends or None, rates

    def chorus_lines(self, batch, threads, network="mlp"):
        return [f for f in select(self.records, "chorus", batch=batch, threads=threads)
                if f.get("network", "mlp") == network and is_fp32(f) and "pair" not in f]

    def chorus_in(self, batch, threads, rnd, network="mlp"):
        found = [f for f in self.chorus_lines(batch, threads, network) if round_of(f) == rnd]
        return num(found[0], "samples_per_s") if found else None

    def chorus(self, batch, threads):
        """(median over rounds, the per-round rates, the lines)."""
        found = self.chorus_lines(batch, threads)
        rates = [self.chorus_in(batch, threads, r) for r in self.rounds(batch)]
        return median(rates), rates, found

    def torch(self, batch, malloc, procs):
        found = select(self.records, "torch", batch=batch, group=f"b{batch}-{malloc}-{procs}")
        return union_rate(found), found

    def duration(self):
        words = [line.split() for kind, _, line in self.records if kind == "measured"]
        return f"measured in {words[0][2]} s" if words else "duration not recorded"

    def last_load(self):
        return self.records[-1][1].get("load_after", "?") if self.records else "?"

    # --- sections ---

    def machine_section(self):
        m, g = self.machine, self.gemm_machine
        torch = (select(self.records, "torch") or [{}])[0]
        flags = [k for k, v in m.items() if v in ("yes", "no")]
        present = [k for k in flags if m[k] == "yes"]
        v4 = all(m.get(k) == "yes" for k in ("avx512f", "avx512bw", "avx512dq", "avx512cd",
                                               "avx512vl"))
        v3 = all(m.get(k) == "yes" for k in ("avx2", "fma"))
        level = "x86-64-v4 (AVX-512)" if v4 else "x86-64-v3 (AVX2)" if v3 else "below x86-64-v3"
        absent = [k for k in flags if m[k] == "no"]
        rows = [
            ("CPU", f"{m.get('cpu', '?')}, {m.get('nproc', '?')} CPUs available"),
            ("ISA", f"{level}; present: {' '.join(present) or 'none'}"
                    + (f"; absent: {' '.join(absent)}" if absent else "")),
            ("threads, chorus", "one thread per member (chorus::Gemm uses only the calling "
                                "thread); 2 members at once on a 2-slot arena"),
            ("threads, PyTorch", "torch.set_num_threads(1) (reported "
                                 f"{torch.get('torch_threads', '?')}), "
                                 f"{m.get('peer_env', '?')}; OpenBLAS reported "
                                 f"{torch.get('openblas_threads', '?')} thread(s); 2 at once = "
                                 "two processes"),
            ("caller's environment", f"OMP_NUM_THREADS={m.get('OMP_NUM_THREADS', '?')}, "
                                     f"OPENBLAS_NUM_THREADS={m.get('OPENBLAS_NUM_THREADS', '?')}"),
            ("OPENBLAS_CORETYPE", f"{m.get('OPENBLAS_CORETYPE', '?')} (recorded, not changed)"),
            ("chorus GEMM kernel", g.get("gemm", "?")),
            ("compiler", g.get("compiler", "?")),
            ("oneDNN", g.get("onednn", "?")),
            ("PyTorch", f"{torch.get('torch', '?')}, BLAS mapped: {torch.get('blas', '?')}"),
            ("run", f"{m.get('date', '?')}, commit {m.get('commit', '?')}, {self.duration()}, "
                    f"1-minute load average {m.get('load_before', '?')} at the start, "
                    f"{self.last_load()} at the end"),
        ]
        return "### Machine\n\n" + table(("", ""), rows)

    def gemm_section(self):
        rows = []
        for b in self.batches:
            g = self.gemm(b)

            def cell(name):
                fs = g.get(name)
                if not fs:
                    return "not measured"
                rates = [float(f["samples_per_s"]) for f in fs]
                gflops = median([float(f["gflops"]) for f in fs])
                return f"{median(rates):,.0f} ({gflops:.0f} GFLOP/s)"
            lim, backend, rates = self.limit(b)
            seq = self.sequence(b)
            rows.append((b, cell("onednn"), cell("chorus"), cell("eigen"),
                         f"{rate(lim)} ({backend}){spread(rates)}",
                         f"{rate(seq.get('onednn'))} / {rate(seq.get('chorus'))}",
                         loads([f for fs in g.values() for f in fs])))
        return ("### GEMM limit (samples/s, one thread)\n\n"
                "The eight products of one training step, each timed alone, summed; limit = "
                "batch / that sum, from the fastest backend; the median over the rounds. "
                "\"Back to back\": the same eight products run one after the other on chained "
                "buffers, as a step runs them, so that operands are no longer hot in cache "
                "(for information; the targets use the limit).\n\n"
                + table(("batch", "oneDNN dnnl_sgemm", "chorus::Gemm", "Eigen (as built)",
                         "limit", "back to back, oneDNN / chorus", "load"), rows))

    def training_section(self):
        one, two = [], []
        for b in self.batches:
            lim, _, _ = self.limit(b)
            c1, c1r, c1f = self.chorus(b, 1)
            c2, c2r, c2f = self.chorus(b, 2)
            limits = [self.limit_in(b, r)[0] for r in self.rounds(b)]
            sequences = [self.sequence_in(b, r) for r in self.rounds(b)]
            t1d, t1df = self.torch(b, "default", 1)
            t1t, t1tf = self.torch(b, "tuned", 1)
            t2d, t2df = self.torch(b, "default", 2)
            t2t, t2tf = self.torch(b, "tuned", 2)
            t1 = max((x for x in (t1d, t1t) if x is not None), default=None)
            t2 = max((x for x in (t2d, t2t) if x is not None), default=None)
            # within-round ratios, then their median: each round's pair saw about the same load
            pct = median([ratio(c, x) for c, x in zip(c1r, limits)])
            pct_seq = median([ratio(c, x) for c, x in zip(c1r, sequences)])
            scaling = median([ratio(c, x) for c, x in zip(c2r, c1r)])
            r1, r2 = ratio(c1, t1), ratio(c2, t2)
            required = 1.3 if b == 128 else 1.5
            if b == 128:
                pct_cell = self.target("batch 128, 1 thread: chorus / GEMM limit", pct, 0.85,
                                       lambda x: f"{x:.1%}")
            else:
                pct_cell = "not measured" if pct is None else f"{pct:.1%}"
            r1_cell = self.target(f"batch {b}, 1 thread: chorus / best PyTorch", r1, required,
                                  lambda x: f"{x:.2f}x")
            r2_cell = self.target(f"batch {b}, 2 at once: chorus / best PyTorch", r2, required,
                                  lambda x: f"{x:.2f}x")
            scaling_cell = self.target(f"batch {b}: chorus 2 members at once / 1", scaling, 1.9,
                                       lambda x: f"{x:.2f}x")
            one.append((b, rate(lim), rate(c1) + spread(c1r), pct_cell,
                        "not measured" if pct_seq is None else f"{pct_seq:.1%}", rate(t1d), rate(t1t), r1_cell,
                        loads(c1f, t1df, t1tf)))
            two.append((b, rate(c2) + spread(c2r), scaling_cell, rate(t2d), rate(t2t), r2_cell,
                        loads(c2f, t2df, t2tf)))
        return ("### Training, one thread (samples/s)\n\n"
                "chorus: the median over the rounds; % of limit and 2 vs 1: the median of the "
                "ratios within each round. PyTorch: one measurement.\n\n"
                + table(("batch", "GEMM limit", "chorus, 1 member", "% of limit",
                         "% of back to back",
                         "PyTorch, default malloc", "PyTorch, tuned malloc",
                         "chorus / best PyTorch", "load"), one)
                + "\n\n### Training, two at once (samples/s)\n\n"
                + table(("batch", "chorus, 2 members", "chorus 2 vs 1",
                         "PyTorch 2 processes, default malloc", "PyTorch 2 processes, tuned malloc",
                         "chorus / best PyTorch", "load"), two))

    def paired_rounds(self, rounds, pair, lines_in, what, required):
        """Table rows for measurements paired within each round, one and two at once: pair(n, r)
        gives the round's two rates (in column order) and their ratio; lines_in(r) the round's
        lines, for the load. Records the targets (what with "1 member" / "2 at once" filled in,
        median ratio >= required); returns (rows, the one-member cell, the two-at-once cell)."""
        rows, ratios = [], {1: [], 2: []}
        for r in rounds:
            cells = [r]
            for n in (1, 2):
                a, b, x = pair(n, r)
                ratios[n].append(x)
                cells += [rate(a), rate(b), "not measured" if x is None else f"{x:.2f}x"]
            cells.append(loads(lines_in(r)))
            rows.append(tuple(cells))
        cell = {n: self.target(what.format("1 member" if n == 1 else "2 at once"), median(ratios[n]),
                               required, lambda x: f"{x:.2f}x") for n in (1, 2)}
        return rows, cell[1], cell[2]

    def conv_section(self):
        """The convolutional member at batch 128: chorus against PyTorch (tuned malloc) per round,
        and the median of the within-round ratios."""
        rounds = sorted({round_of(f) for f in self.chorus_lines(128, 1, "conv")} - {None})
        if not rounds:
            return "### Convolutional member (batch 128)\n\nNot measured in this run."

        def pair(procs, r):
            c = self.chorus_in(128, procs, r, "conv")
            t = union_rate([f for f in select(self.records, "torch", group=f"b128-tuned-{procs}-conv")
                            if round_of(f) == r])
            return c, t, ratio(c, t)
        rows, r1, r2 = self.paired_rounds(
            rounds, pair, lambda r: [f for f in self.chorus_lines(128, 1, "conv") if round_of(f) == r],
            "conv member, batch 128, {}: chorus / PyTorch", 1.5)
        return ("### Convolutional member (batch 128, samples/s)\n\n"
                "The network of configs/fashion_mnist_conv.yaml (1 x 28 x 28, 3 x 3 convolutions to 16 "
                "and 32 channels with 2 x 2 max pooling, then 1568-128-10); PyTorch with tuned malloc, "
                "measured right after chorus in each round. Median ratio: one member "
                f"{r1}, two at once {r2}.\n\n"
                + table(("round", "chorus, 1", "PyTorch, 1", "ratio", "chorus, 2 at once",
                         "PyTorch, 2 at once", "ratio", "load"), rows))

    def bf16_gemm_rows(self):
        """Per batch, the median over rounds of the GEMM limit with fp32 and with bf16 products
        (chorus-bench-gemm's bf16 backends, where the CPU has them)."""
        rows = []
        for b in self.batches:
            rates = {}
            for f in select(self.records, "gemm-limit", batch=b):
                rates.setdefault(f["backend"], []).append(float(f["samples_per_s"]))
            if "chorus_bf16" not in rates:
                continue
            med = {name: median(values) for name, values in rates.items()}
            gain = ratio(med.get("chorus_bf16"), med.get("chorus"))
            rows.append((b, rate(med.get("chorus")), rate(med.get("chorus_bf16")),
                         rate(med.get("onednn_bf16")), rate(med.get("onednn_fpmath_bf16")),
                         "not measured" if gain is None else f"{gain:.2f}x"))
        return rows

    def bf16_section(self):
        """bf16 products at batch 128: chorus fp32 and bf16 back to back in each round (lines
        tagged pair=bf16), and the median of the within-round ratios; and the GEMM limit with bf16
        products at every batch."""
        lines = [f for f in select(self.records, "chorus", batch=128) if f.get("pair") == "bf16"]
        rounds = sorted({round_of(f) for f in lines} - {None}, key=int)
        if not rounds:
            return "### bf16 products (batch 128)\n\nNot measured in this run (no AVX512_BF16)."

        def rate_of(threads, products, rnd):
            found = [f for f in lines if f.get("threads") == str(threads) and round_of(f) == rnd
                     and f.get("products", "fp32") == products]
            return num(found[0], "samples_per_s") if found else None

        def pair(threads, r):
            fp32, bf16 = rate_of(threads, "fp32", r), rate_of(threads, "bf16", r)
            return fp32, bf16, ratio(bf16, fp32)
        rows, r1, r2 = self.paired_rounds(rounds, pair, lambda r: [f for f in lines if round_of(f) == r],
                                          "batch 128, {}: chorus bf16 / fp32 products", 1.6)
        return ("### bf16 products (batch 128, samples/s)\n\n"
                "chorus-bench-train 128 3 with train.products fp32, then bf16, in each round. Median "
                f"ratio: one member {r1}, two at once {r2}.\n\n"
                + table(("round", "fp32, 1", "bf16, 1", "ratio", "fp32, 2 at once", "bf16, 2 at once",
                         "ratio", "load"), rows)
                + "\n\nThe GEMM limit (samples/s, one thread; as above, the median over the rounds) "
                "with bf16 products, every backend converting the fp32 operands as a step must:\n\n"
                + table(("batch", "chorus fp32", "chorus bf16", "oneDNN bf16 matmul + reorders",
                         "oneDNN f32 matmul, fpmath_mode bf16", "chorus bf16 / fp32"),
                        self.bf16_gemm_rows()))

    def step_section(self):
        pieces = [("products", "the eight products back to back"),
                  ("backward", "+ bias, activation, head, bias gradients"),
                  ("step_fused", "+ SGD step, fused into the weight-gradient tiles"),
                  ("step_split", "+ SGD step, as a separate pass instead"),
                  ("gather_step", "gathering the minibatch, then TrainingStep (fused below "
                                  "64 rows, else separate)")]
        rows = []
        for b in self.batches:
            found = {f["piece"]: f for f in select(self.records, "chorus-step", batch=b)}
            if not found:
                continue
            for piece, what in pieces:
                f = found.get(piece)
                if f is None:
                    continue
                rows.append((b, what, f"{num(f, 'median_us'):,.0f}", f"{num(f, 'best_us'):,.0f}",
                             rate(num(f, "samples_per_s")), loads([f])))
        if not rows:
            return "### Where a step's time goes\n\nNot measured in this run."
        return ("### Where a step's time goes (one thread)\n\n"
                "chorus-bench-step: pieces of a step, each SGD variant adding to the backward "
                "pass, all timed in turn in one process (30 blocks of about 2048 samples each), so that a slow spell of the "
                "machine falls on all of them alike. samples/s from the median.\n\n"
                + table(("batch", "piece", "median us per step", "best us", "samples/s", "load"),
                        rows))

    def predict_section(self):
        rows = []
        for f in select(self.records, "chorus-predict"):
            t = int(f["threads"])
            threads = f"{t} thread" + ("s" if t > 1 else "")
            per_core = num(f, "rows_per_s_steady") * PREDICT_NETWORKS_PER_ROW / t
            per_cpu_s = num(f, "rows_per_cpu_s_steady")
            cell = self.target(f"predict, {threads}: member-sample-rows/s per core", per_core,
                               1e6, lambda x: f"{x:,.0f}")
            rows.append((f"`chorus predict`, {threads}",
                         f"{num(f, 'rows_per_s_steady'):,.0f} rows/s steady, so {cell} "
                         "member-sample-rows/s per core"
                         + ("" if per_cpu_s is None else
                            f" ({per_cpu_s * PREDICT_NETWORKS_PER_ROW:,.0f} per CPU-second)")
                         + f"; peak RSS {num(f, 'peak_rss_mib'):.0f} MiB", loads([f])))
        if not rows:
            self.target("predict: member-sample-rows/s per core", None, 1e6, lambda x: f"{x:,.0f}")
        memory = select(self.records, "worker-memory")
        for f in memory:
            peak, bound = num(f, "peak_rss_mib"), num(f, "bound_mib")
            verdict = "met" if peak <= bound else "**not met**"
            rows.append(("worker peak memory",
                         f"{peak:,.1f} MiB (target <= {bound:,.1f} MiB: {verdict})", loads([f])))
            self.targets.append(("worker peak memory within the bound", f"{peak:,.1f} MiB",
                                 f"<= {bound:,.1f} MiB", verdict))
        if not memory:
            self.targets.append(("worker peak memory within the bound", "not measured", "",
                                 "not measured"))
        if not rows:
            return "### Predict and worker memory\n\nNot measured in this run."
        return "### Predict and worker memory\n\n" + table(("figure", "value", "load"), rows)

    def render(self):
        sections = [self.machine_section(), self.gemm_section(), self.training_section(),
                    self.conv_section(), self.bf16_section(), self.step_section(),
                    self.predict_section()]
        sections.append("### Targets (issues 6 and 15)\n\n"
                        + table(("target", "measured", "required", "met"), self.targets))
        raw = "\n".join(line for _, _, line in self.records)
        sections.append("<details><summary>Raw output of this run</summary>\n\n```\n" + raw
                        + "\n```\n\n</details>")
        return "\n\n".join(sections)


def write_markdown(path, text):
    with open(path) as f:
        old = f.read()
    if BEGIN not in old or END not in old or old.index(BEGIN) > old.index(END):
        sys.exit(f"report.py: {path} lacks the markers {BEGIN} ... {END}")
    head, rest = old.split(BEGIN, 1)
    tail = rest.split(END, 1)[1]
    with open(path, "w") as f:
        f.write(f"{head}{BEGIN}\n{text}\n{END}{tail}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("raw")
    parser.add_argument("--markdown", help="file whose generated part to replace")
    args = parser.parse_args()
    with open(args.raw) as f:
        text = Report(parse(f)).render()
    print(text)
    if args.markdown:
        write_markdown(args.markdown, text)


if __name__ == "__main__":
    main()

#!/usr/bin/env python3
"""Chaos soak: runs of many jobs over chorus-worker processes while faults are injected, each
checked against an undisturbed in-process run of the same config.

  scripts/chaos_soak.py [--minutes M] [--members N] [--epochs E] [--workers W] [--seed S]
                        [--build DIR] [--work DIR] [--keep] [--skip-if-unable]

One round: a coordinator (`chorus run`, no embedded workers, listening on the host end of a veth
pair) and W workers, one of them inside a network namespace behind that veth pair, run a
classification config of N members (a holdout, so one job per member). Meanwhile a chaos loop,
every 1-4 s, does one of:
  worker_kill   SIGKILL a random worker; a fresh one starts 0.5-2 s later
  worker_stop   SIGSTOP a random worker for 1-4 lease lengths, then SIGCONT (its lease expires;
                when it wakes its heartbeat or upload finds the job leased again or finished)
  link_drop     take the namespaced worker's link down for 1-4 lease lengths
  disk_fill     fill the run directory's file system (a small tmpfs) for 0.5-2 s
and the coordinator is SIGKILLed twice per round (after about a third and two thirds of the
members have finished) and resumed with `chorus run --resume` each time. A coordinator that
exits non-zero (e.g. a full disk at the wrong moment) is resumed too and counted.

Checked at the end of every round (the invariants):
  finished   the run completes (report.json, bundle.chorus written, coordinator exits 0)
  once       every member has exactly one member_finished event in events.jsonl
  results    every jobs/*/result.pb is byte-identical to the undisturbed run's
  bundle     bundle.chorus is byte-identical to the undisturbed run's
  report     report.json is identical to the undisturbed run's except the fields that describe
             the circumstances, not the result: wall_seconds, manifest.wall_seconds,
             manifest.coordinator.mode, manifest.workers, the wall time by phase (phases) and the
             measured CPU-seconds (compute,
             members[].cpu_seconds, size_curve[].cpu_seconds)

Rounds repeat until M minutes have passed (at least one). Prints a line per fault and per round,
then totals: faults by kind, jobs retried (lease_expired, job_retry, lease_returned events),
duplicate results dropped, coordinator restarts, invariants held; writes the same as JSON to
WORK/summary.json. Exit 0 when every invariant held in every round, 1 otherwise, 2 on bad usage
or when the machine cannot host the faults (root is needed for the namespace and the tmpfs);
with --skip-if-unable that last case prints SKIPPED and the reason and exits 0 instead (as the
namespace tests in CTest skip without root).
"""
import argparse
import atexit
import json
import os
import random
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time

LEASE_SECONDS = 2.0
CIRCUMSTANCE_FIELDS = [("wall_seconds",), ("manifest", "wall_seconds"), ("manifest", "coordinator", "mode"),
                       ("manifest", "workers"), ("compute",), ("phases",)]
# Measured CPU-seconds in each entry of a list: what the jobs cost, not what they computed.
CIRCUMSTANCE_ENTRY_FIELDS = [("members", "cpu_seconds"), ("size_curve", "cpu_seconds")]


def log(msg):
    print(time.strftime("%H:%M:%S ") + msg, flush=True)


def run(cmd, timeout=600, check=True):
    r = subprocess.run(cmd, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, timeout=timeout)
    if check and r.returncode != 0:
        raise RuntimeError(f"`{' '.join(cmd)}` exited {r.returncode}: {r.stdout[-2000:]}")
    return r


class Machine:
    """What the soak sets up on this machine: a network namespace joined to the host by a veth
    pair, and a small tmpfs for the run directories. Torn down on exit, whatever happened."""

    def __init__(self, work):
        tag = os.getpid() % 100000
        self.ns = f"chorus-soak-{tag}"
        self.host_if, self.ns_if = f"csk{tag}h", f"csk{tag}n"
        third = 100 + tag % 150
        self.host_addr, self.ns_addr = f"10.214.{third}.1", f"10.214.{third}.2"
        self.disk = os.path.join(work, "disk")
        self.made_ns = self.mounted = False

    def setup(self, disk_mib):
        os.makedirs(self.disk, exist_ok=True)
        run(["mount", "-t", "tmpfs", "-o", f"size={disk_mib}m", "tmpfs", self.disk])
        self.mounted = True
        run(["ip", "netns", "add", self.ns])
        self.made_ns = True
        run(["ip", "link", "add", self.host_if, "type", "veth", "peer", "name", self.ns_if, "netns", self.ns])
        run(["ip", "addr", "add", self.host_addr + "/24", "dev", self.host_if])
        run(["ip", "link", "set", self.host_if, "up"])
        for c in (["ip", "addr", "add", self.ns_addr + "/24", "dev", self.ns_if],
                  ["ip", "link", "set", self.ns_if, "up"], ["ip", "link", "set", "lo", "up"]):
            run(["ip", "netns", "exec", self.ns] + c)

    def link(self, up):
        run(["ip", "netns", "exec", self.ns, "ip", "link", "set", self.ns_if, "up" if up else "down"])

    def teardown(self):
        if self.made_ns:
            run(["ip", "netns", "del", self.ns], check=False)  # deletes the veth pair with it
            self.made_ns = False
        if self.mounted:
            run(["umount", "-l", self.disk], check=False)
            self.mounted = False


def free_port(addr):
    with socket.socket() as s:
        s.bind((addr, 0))
        return s.getsockname()[1]


def events(run_dir):
    out = []
    try:
        with open(os.path.join(run_dir, "events.jsonl")) as f:
            for line in f:
                line = line.strip()
                if line:
                    try:
                        out.append(json.loads(line))
                    except json.JSONDecodeError:
                        out.append({"event": "<torn line>"})  # a line cut by a kill or a full disk
    except FileNotFoundError:
        pass
    return out


def job_results(run_dir):
    jobs = os.path.join(run_dir, "jobs")
    out = {}
    for name in sorted(os.listdir(jobs)) if os.path.isdir(jobs) else []:
        path = os.path.join(jobs, name, "result.pb")
        if os.path.exists(path):
            with open(path, "rb") as f:
                out[name] = f.read()
    return out


def read_bytes(path):
    with open(path, "rb") as f:
        return f.read()


def without_circumstances(report):
    for path in CIRCUMSTANCE_FIELDS:
        node = report
        for key in path[:-1]:
            node = node.get(key, {})
        node.pop(path[-1], None)
    for array, key in CIRCUMSTANCE_ENTRY_FIELDS:
        for entry in report.get(array, []):
            entry.pop(key, None)
    return report


def run_dir_under(out):
    dirs = [os.path.join(out, d) for d in os.listdir(out)] if os.path.isdir(out) else []
    dirs = [d for d in dirs if os.path.isdir(d) and not os.path.basename(d).startswith(".")]
    return dirs[0] if len(dirs) == 1 else None


class Round:
    """One soak round: a coordinator, W workers and the chaos loop, until the run completes."""

    def __init__(self, args, machine, config, token_file, address, number, rng):
        self.args, self.m, self.config, self.token_file, self.address = args, machine, config, token_file, address
        self.number, self.rng = number, rng
        self.out = os.path.join(machine.disk, f"round-{number}")
        self.logs = os.path.join(args.work, f"round-{number}-logs")
        os.makedirs(self.logs, exist_ok=True)
        self.coordinator = None
        self.workers = [None] * args.workers
        self.stopped = {}          # worker slot -> time to SIGCONT
        self.link_up_at = None
        self.faults = {"worker_kill": 0, "worker_stop": 0, "link_drop": 0, "disk_fill": 0, "coordinator_kill": 0}
        self.coordinator_restarts = 0
        self.coordinator_failures = []  # exit codes of coordinators that stopped on their own with an error

    def chorus(self, name):
        return os.path.join(self.args.build, name)

    def start_coordinator(self, resume_dir=None):
        argv = [self.chorus("chorus"), "run"]
        argv += ["--resume", resume_dir] if resume_dir else [self.config, "--out", self.out]
        logf = open(os.path.join(self.logs, "coordinator.log"), "a")
        self.coordinator = subprocess.Popen(argv, stdout=logf, stderr=subprocess.STDOUT)

    def start_worker(self, slot):
        argv = [self.chorus("chorus-worker"), "--coordinator", self.address, "--token-file", self.token_file,
                "--cache-dir", os.path.join(self.args.work, f"cache-{slot}"), "--max-backoff", "0.5"]
        if slot == 0:  # the namespaced worker; `ip netns exec` execs it, so the pid is the worker's
            argv = ["ip", "netns", "exec", self.m.ns] + argv
        logf = open(os.path.join(self.logs, f"worker-{slot}.log"), "a")
        self.workers[slot] = subprocess.Popen(argv, stdout=logf, stderr=subprocess.STDOUT)

    def finished_members(self, run_dir):
        return len({e.get("member") for e in events(run_dir) if e.get("event") == "member_finished"})

    def wake_due(self, now, force=False):
        for slot, when in list(self.stopped.items()):
            if force or now >= when:
                w = self.workers[slot]
                if w and w.poll() is None:
                    w.send_signal(signal.SIGCONT)
                del self.stopped[slot]
        if self.link_up_at is not None and (force or now >= self.link_up_at):
            self.m.link(True)
            self.link_up_at = None

    def inject(self, run_dir):
        kind = self.rng.choice(["worker_kill", "worker_stop", "link_drop", "disk_fill"])
        slot = self.rng.randrange(self.args.workers)
        w = self.workers[slot]
        if kind == "worker_kill":
            if w is None or w.poll() is not None:
                return
            self.stopped.pop(slot, None)
            w.kill()
            w.wait()
            time.sleep(self.rng.uniform(0.5, 2.0))
            self.start_worker(slot)
            detail = f"worker {slot}"
        elif kind == "worker_stop":
            if w is None or w.poll() is not None or slot in self.stopped:
                return
            w.send_signal(signal.SIGSTOP)
            hold = self.rng.uniform(1, 4) * LEASE_SECONDS
            self.stopped[slot] = time.time() + hold
            detail = f"worker {slot} for {hold:.1f} s"
        elif kind == "link_drop":
            if self.link_up_at is not None:
                return
            self.m.link(False)
            hold = self.rng.uniform(1, 4) * LEASE_SECONDS
            self.link_up_at = time.time() + hold
            detail = f"namespaced worker's link for {hold:.1f} s"
        else:
            filler = os.path.join(self.m.disk, "filler")
            with open(filler, "wb") as f:
                block = b"\0" * (1 << 20)
                try:
                    while True:
                        f.write(block)
                        f.flush()
                except OSError:
                    pass
            hold = self.rng.uniform(0.5, 2.0)
            time.sleep(hold)
            os.remove(filler)
            detail = f"for {hold:.1f} s"
        self.faults[kind] += 1
        log(f"round {self.number}: {kind} {detail} ({self.finished_members(run_dir)} members finished)")

    def play(self):
        members = self.args.members
        self.start_coordinator()
        for slot in range(self.args.workers):
            self.start_worker(slot)
        deadline = time.time() + self.args.round_timeout
        run_dir = None
        kill_at = [members // 3, (2 * members) // 3]
        next_fault = time.time() + self.rng.uniform(1, 4)
        try:
            while time.time() < deadline:
                time.sleep(0.1)
                now = time.time()
                self.wake_due(now)
                run_dir = run_dir or run_dir_under(self.out)
                code = self.coordinator.poll()
                if code is not None:
                    if code == 0:
                        break
                    self.coordinator_failures.append(code)
                    log(f"round {self.number}: coordinator exited {code} on its own; resuming")
                    if run_dir is None or len(self.coordinator_failures) > 20:
                        return False
                    self.start_coordinator(run_dir)
                    self.coordinator_restarts += 1
                    continue
                if run_dir is None:
                    continue
                if kill_at and self.finished_members(run_dir) >= kill_at[0]:
                    kill_at.pop(0)
                    self.coordinator.kill()
                    self.coordinator.wait()
                    self.faults["coordinator_kill"] += 1
                    log(f"round {self.number}: coordinator_kill at {self.finished_members(run_dir)} members; resuming")
                    time.sleep(self.rng.uniform(0.2, 1.5))
                    self.start_coordinator(run_dir)
                    self.coordinator_restarts += 1
                    continue
                if now >= next_fault:
                    self.inject(run_dir)
                    next_fault = time.time() + self.rng.uniform(1, 4)
            else:
                log(f"round {self.number}: no end within {self.args.round_timeout} s")
                return False
            return True
        finally:
            self.wake_due(time.time(), force=True)
            self.stop_all()
            self.run_dir = run_dir

    def stop_all(self):
        procs = [p for p in self.workers + [self.coordinator] if p is not None]
        for p in procs:
            if p.poll() is None:
                p.send_signal(signal.SIGCONT)
                p.terminate()
        for p in procs:
            try:
                p.wait(timeout=15)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()


def check(run_dir, reference, members):
    """The invariants: {name: (held, detail)}."""
    out = {}
    ev = events(run_dir) if run_dir else []
    report_path = os.path.join(run_dir or "", "report.json")
    out["finished"] = (bool(run_dir) and os.path.exists(report_path), run_dir or "no run directory")
    counts = {}
    for e in ev:
        if e.get("event") == "member_finished":
            counts[e.get("member")] = counts.get(e.get("member"), 0) + 1
    wrong = {m: c for m, c in counts.items() if c != 1}
    missing = [m for m in range(members) if m not in counts]
    out["once"] = (not wrong and not missing, f"repeated {wrong}, missing {missing[:10]}")
    results = job_results(run_dir) if run_dir else {}
    differ = sorted(k for k in set(results) | set(reference["results"])
                    if results.get(k) != reference["results"].get(k))
    out["results"] = (not differ, f"{len(results)} result files; differing: {differ[:10]}")
    bundle = os.path.join(run_dir or "", "bundle.chorus")
    out["bundle"] = (os.path.exists(bundle) and read_bytes(bundle) == reference["bundle"], "bundle.chorus")
    same = False
    if out["finished"][0]:
        with open(report_path) as f:
            same = without_circumstances(json.load(f)) == reference["report"]
    out["report"] = (same, "report.json less " + ", ".join(".".join(p) for p in CIRCUMSTANCE_FIELDS + CIRCUMSTANCE_ENTRY_FIELDS))
    return out


def count_events(run_dir, names):
    ev = events(run_dir) if run_dir else []
    return {n: sum(1 for e in ev if e.get("event") == n) for n in names}


def write_config(path, name, data_dir, members, epochs, listen, token_file):
    with open(path, "w") as f:
        f.write(f"# Chaos soak config; the data is the fictional demo data set (chorus-demo-data).\n"
                f"run: {{name: {name}, seed: 11}}\n"
                f"data: {{train: {data_dir}/alarms_train.csv, test: {data_dir}/alarms_test.csv, target: cause,\n"
                f"       categorical: [station], validation: {{fraction: 0.2}}}}\n"
                f"model: {{hidden: [32, 32]}}\n"
                f"train: {{epochs: {epochs}, batch_size: 32, early_stopping: {{mode: off}}}}\n"
                f"ensemble: {{members: {members}, min_members: {members}}}\n")
        if listen:
            f.write(f"cluster: {{local_workers: 0, listen: \"{listen}\", lease_seconds: {LEASE_SECONDS},\n"
                    f"          token_file: {token_file}}}\n")


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("--minutes", type=float, default=60, help="keep starting rounds until then (default 60)")
    p.add_argument("--members", type=int, default=200, help="members (= jobs) per round (default 200)")
    p.add_argument("--epochs", type=int, default=400, help="epochs per member (default 400)")
    p.add_argument("--workers", type=int, default=4, help="worker processes, one namespaced (default 4)")
    p.add_argument("--seed", type=int, default=None, help="chaos random seed (default: from the clock)")
    p.add_argument("--build", default=os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "build"),
                   help="build directory holding chorus and chorus-worker (default build/)")
    p.add_argument("--work", default=None, help="working directory (default: a new one under /tmp)")
    p.add_argument("--round-timeout", type=float, default=1800, help="seconds one round may take (default 1800)")
    p.add_argument("--keep", action="store_true", help="keep the working directory")
    p.add_argument("--skip-if-unable", action="store_true",
                   help="exit 0 (SKIPPED) when the machine cannot host the faults")
    args = p.parse_args()
    if args.members < 3 or args.epochs < 1 or args.workers < 2 or args.minutes < 0:
        p.error("need --members >= 3, --epochs >= 1, --workers >= 2, --minutes >= 0")
    def unable(why):
        print(f"chaos_soak.py: {'SKIPPED: ' if args.skip_if_unable else ''}{why}", file=sys.stderr)
        return 0 if args.skip_if_unable else 2

    if os.geteuid() != 0:
        return unable("needs root (a network namespace and a tmpfs)")
    if shutil.which("ip") is None:
        return unable("no `ip` executable (Debian package iproute2)")
    args.build = os.path.abspath(args.build)
    for exe in ("chorus", "chorus-worker", "chorus-demo-data"):
        if not os.access(os.path.join(args.build, exe), os.X_OK):
            print(f"chaos_soak.py: {args.build}/{exe} is missing; build first", file=sys.stderr)
            return 2
    seed = args.seed if args.seed is not None else int(time.time())
    rng = random.Random(seed)
    args.work = os.path.abspath(args.work or tempfile.mkdtemp(prefix="chorus-soak-"))
    os.makedirs(args.work, exist_ok=True)
    machine = Machine(args.work)
    atexit.register(machine.teardown)
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(1))
    try:
        machine.setup(disk_mib=128 + args.members)
    except RuntimeError as e:
        return unable(f"cannot set up the faults: {e}")
    log(f"chaos soak: seed {seed}, {args.members} members x {args.epochs} epochs, {args.workers} workers, "
        f"{args.minutes} min, work dir {args.work}")

    data = os.path.join(args.work, "data")
    run([os.path.join(args.build, "chorus-demo-data"), data, "--train-rows", "1000", "--test-rows", "300"])
    token_file = os.path.join(args.work, "worker.token")
    with open(token_file, "w") as f:
        f.write(f"soak-token-{rng.getrandbits(64):016x}\n")
    os.chmod(token_file, 0o600)
    port = free_port(machine.host_addr)
    address = f"{machine.host_addr}:{port}"
    soak_config = os.path.join(args.work, "soak.yaml")
    write_config(soak_config, "soak", data, args.members, args.epochs, address, token_file)
    reference_config = os.path.join(args.work, "reference.yaml")
    write_config(reference_config, "soak", data, args.members, args.epochs, None, None)

    log("reference: the same config trained in process, undisturbed")
    ref_out = os.path.join(args.work, "reference")
    start = time.time()
    run([os.path.join(args.build, "chorus"), "run", reference_config, "--out", ref_out], timeout=3600)
    ref_dir = run_dir_under(ref_out)
    with open(os.path.join(ref_dir, "report.json")) as f:
        reference = {"results": job_results(ref_dir), "bundle": read_bytes(os.path.join(ref_dir, "bundle.chorus")),
                     "report": without_circumstances(json.load(f))}
    log(f"reference: {len(reference['results'])} jobs in {time.time() - start:.0f} s")

    soak_end = time.time() + args.minutes * 60
    totals = {"rounds": 0, "faults": {}, "retried": {}, "duplicate_results": 0, "coordinator_restarts": 0,
              "coordinator_exits_on_own": [], "invariants": {}}
    all_held = True
    number = 0
    while number == 0 or time.time() < soak_end:
        number += 1
        r = Round(args, machine, soak_config, token_file, address, number, rng)
        start = time.time()
        ended = r.play()
        held = check(r.run_dir, reference, args.members)
        if not ended:
            held["finished"] = (False, "did not end")
        retried = count_events(r.run_dir, ["lease_expired", "job_retry", "lease_returned"])
        dups = count_events(r.run_dir, ["duplicate_result"])["duplicate_result"]
        totals["rounds"] += 1
        for k, v in r.faults.items():
            totals["faults"][k] = totals["faults"].get(k, 0) + v
        for k, v in retried.items():
            totals["retried"][k] = totals["retried"].get(k, 0) + v
        totals["duplicate_results"] += dups
        totals["coordinator_restarts"] += r.coordinator_restarts
        totals["coordinator_exits_on_own"] += r.coordinator_failures
        for k, (ok, detail) in held.items():
            t = totals["invariants"].setdefault(k, {"held": 0, "broken": 0})
            t["held" if ok else "broken"] += 1
            if not ok:
                all_held = False
                log(f"round {number}: INVARIANT BROKEN {k}: {detail}")
        log(f"round {number}: {time.time() - start:.0f} s, faults {r.faults}, retried {retried}, "
            f"duplicates {dups}, invariants " + ("all held" if all(ok for ok, _ in held.values()) else "BROKEN"))
        if all(ok for ok, _ in held.values()):
            shutil.rmtree(r.out, ignore_errors=True)  # keep the tmpfs free; logs stay in WORK
        else:
            kept = os.path.join(args.work, f"round-{number}-run")
            shutil.copytree(r.out, kept, dirs_exist_ok=True)
            log(f"round {number}: run directory kept in {kept}")
    totals["seed"] = seed
    totals["all_invariants_held"] = all_held
    with open(os.path.join(args.work, "summary.json"), "w") as f:
        json.dump(totals, f, indent=1)
    log("totals: " + json.dumps(totals))
    if all_held and not args.keep:
        machine.teardown()
        shutil.rmtree(args.work, ignore_errors=True)
    return 0 if all_held else 1


if __name__ == "__main__":
    sys.exit(main())

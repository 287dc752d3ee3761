"""What calling from Python costs: `simulate` through the package against the `copyloop` binary
for the same arguments, interleaved, each case `ROUNDS` times (run from the repository root
after `cargo build --release`; a measurement, not a test).

Prints, per case, the median wall time and the median CPU time (all threads) of each side: the
binary's as the child process's user + system time, the package's as the process's CPU time
across the call. CPU time is the steadier figure on a loaded machine.
"""

import os
import resource
import subprocess
import sys
import time
from pathlib import Path
from statistics import median

import copyloop

ROOT = Path(__file__).resolve().parents[2]
BIN = os.environ.get("COPYLOOP_BIN", str(ROOT / "target" / "release" / "copyloop"))
ROUNDS = int(os.environ.get("ROUNDS", "3"))

CASES = [
    ("1000 replicates, receptor_signal, 600 s", "reactions/receptor_signal.crn",
     dict(t_end=600, replicates=1000, seed=1)),
    ("1 long run, gland_loop, 200000 s", "reactions/gland_loop.crn",
     dict(t_end=200000, replicates=1, seed=1)),
]


def binary(path, kw):
    args = [BIN, "simulate", str(ROOT / path), "--t-end", str(kw["t_end"]),
            "--replicates", str(kw["replicates"]), "--seed", str(kw["seed"]), "--json"]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    subprocess.run(args, check=True, stdout=subprocess.DEVNULL)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def package(path, kw):
    t, c = time.perf_counter(), time.process_time()
    net = copyloop.load(str(ROOT / path))
    net.simulate(**kw).to_json()
    return time.perf_counter() - t, time.process_time() - c


print(f"uptime: {os.popen('uptime').read().strip()}", flush=True)
for label, path, kw in CASES:
    b, p = [], []
    for _ in range(ROUNDS):
        b.append(binary(path, kw))
        p.append(package(path, kw))
    bw, bc = median(x[0] for x in b), median(x[1] for x in b)
    pw, pc = median(x[0] for x in p), median(x[1] for x in p)
    print(f"{label}: binary wall {bw:.2f} s cpu {bc:.2f} s; python wall {pw:.2f} s cpu {pc:.2f} s; "
          f"python/binary wall {pw / bw:.3f} cpu {pc / bc:.3f}", flush=True)
print(f"uptime: {os.popen('uptime').read().strip()}", flush=True)
sys.exit(0)

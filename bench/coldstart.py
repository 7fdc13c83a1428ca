"""Cold start: what a first call costs in compiling, in fresh processes with an empty cache.

Every row runs in a fresh Python process with an empty ``NUMBA_CACHE_DIR``, so it pays
every compile a new user, a CI run or a fresh Dask worker pays. Times are printed in
seconds and in units of numba's compile of a trivial ``prange`` kernel (the first parallel
kernel of a process, thread-pool start included), the median of three fresh processes of
the same run, so the multiples hold from machine to machine. Rows also give the process's CPU
seconds over the same calls as a multiple of the unit's CPU seconds: on a machine that
others share, steadier than wall time.

    python bench/coldstart.py              # the table (about 4 minutes on 2 cores)
    python bench/coldstart.py --profile    # and the compile time of every kernel per row
    python bench/coldstart.py --only iou   # rows whose name contains "iou"
    python bench/coldstart.py --only suppress --against HEAD~1 --runs 5
                                           # A/B: this tree against a git revision

``--against`` runs the chosen rows alternately from the working tree and from a temporary
checkout of the revision (fresh processes, empty caches) and prints the median and range
of their CPU seconds: compile time drifts by a tenth of its value within half an hour
on a shared machine, so two versions are compared side by side, never one run against
another from earlier.

The kernel table lists, per row, each compiled function (``module.function``) with its
exclusive compile time (its own typing, lowering and LLVM work, without the functions it
calls) and its inclusive time; ``n`` counts compiles (two means two signatures).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import textwrap
import time

from _util import ROOT

# The snippet each row runs after ``import obbiou`` (timed from the start of the snippet).
# ``first`` is what the goal counts; every row ends by printing its timings as JSON.
TRIVIAL_PARALLEL = """
from numba import njit, prange
@njit(parallel=True)
def f(n):
    s = 0.0
    for i in prange(n):
        s += i
    return s
c0 = time.process_time(); t0 = time.perf_counter(); f(10)
first = time.perf_counter() - t0; cpu = time.process_time() - c0
"""

TRIVIAL_SERIAL = """
from numba import njit
@njit
def f(n):
    s = 0.0
    for i in range(n):
        s += i
    return s
c0 = time.process_time(); t0 = time.perf_counter(); f(10)
first = time.perf_counter() - t0; cpu = time.process_time() - c0
"""

FIRST_IOU = """
import numpy as np, obbiou
rng = np.random.default_rng(0)
def boxes(n):
    if LAYOUT == "rotated":
        b = rng.uniform(0, 10, (n, 5)); b[:, 2:4] += 1; return b
    if LAYOUT == "upright":
        b = rng.uniform(0, 10, (n, 7)); b[:, 3:6] += 1; return b
    c = rng.uniform(0, 10, (n, 1, 2)); t = np.linspace(0, 2 * np.pi, 5)[:-1]
    return c + np.stack([np.cos(t), np.sin(t)], -1)[None] * 2
small, big = boxes(3), boxes(300)
c0 = time.process_time()
t0 = time.perf_counter(); obbiou.iou(small, small); first = time.perf_counter() - t0
t0 = time.perf_counter(); obbiou.iou(big, big); extra = time.perf_counter() - t0
cpu = time.process_time() - c0
"""

FIRST_PAIRS = """
import numpy as np, obbiou
rng = np.random.default_rng(0)
def boxes(n, span):  # rotated boxes 5-30 long at random angles
    return np.column_stack([rng.uniform(0, span, (n, 2)), rng.uniform(5, 30, (n, 2)),
                            rng.uniform(-np.pi, np.pi, n)])
b = boxes(50, 100)
c0 = time.process_time()
t0 = time.perf_counter(); obbiou.overlapping_pairs(b); first = time.perf_counter() - t0
b = boxes(30000, 3000)
t0 = time.perf_counter(); obbiou.overlapping_pairs(b); extra = time.perf_counter() - t0
cpu = time.process_time() - c0
"""

FIRST_SUPPRESS = """
import numpy as np, obbiou
rng = np.random.default_rng(0)
def boxes(n, span):  # rotated boxes 5-30 long at random angles
    return np.column_stack([rng.uniform(0, span, (n, 2)), rng.uniform(5, 30, (n, 2)),
                            rng.uniform(-np.pi, np.pi, n)])
b = boxes(50, 100)
c0 = time.process_time()
t0 = time.perf_counter(); obbiou.suppress(b, rng.random(50)); first = time.perf_counter() - t0
b = boxes(30000, 3000)
t0 = time.perf_counter(); obbiou.suppress(b, rng.random(30000)); extra = time.perf_counter() - t0
cpu = time.process_time() - c0
"""

FIRST_EVALUATE = """
import numpy as np
from obbiou.evaluation import evaluate
rng = np.random.default_rng(0)
n = 40
truth = {"frame": rng.integers(0, 4, n), "label": rng.choice(["vessel", "crane"], n),
         "cx": rng.uniform(0, 500, n), "cy": rng.uniform(0, 500, n),
         "width": rng.uniform(20, 60, n), "height": rng.uniform(8, 20, n),
         "angle": rng.uniform(-1.5, 1.5, n)}
dets = {k: (v + rng.normal(0, 1, n) if k in ("cx", "cy") else v) for k, v in truth.items()}
dets["score"] = rng.random(n)
c0 = time.process_time()
t0 = time.perf_counter()
evaluate(truth, dets, iou="0.5:0.95:0.05")
first = time.perf_counter() - t0
cpu = time.process_time() - c0
"""

WARM_IMPORT = """
import numpy as np
t_numpy = time.perf_counter() - T_START
import obbiou
obbiou.iou([0, 0, 2, 2, 0.3], [1, 0, 2, 2, 0.0])
first = time.perf_counter() - T_START
"""


#: Fresh processes that measure the unit (their median is the unit).
UNIT_RUNS = 3


def _snippet(body: str, layout: str = "", profile: bool = False) -> str:
    """The code of one row: timers, an optional compile recorder, the body, JSON out."""
    head = f"""
import time
T_START = time.perf_counter()
import json, sys, collections
LAYOUT = {layout!r}
extra = 0.0
kernels = {{}}
"""
    if profile:
        head += textwrap.dedent(
            """
            from numba.core import event
            _stack = []
            _incl, _excl, _count = (collections.Counter() for _ in range(3))
            class _Listener(event.Listener):
                def on_start(self, ev):
                    f = ev.data["dispatcher"].py_func
                    name = f.__module__.split(".")[-1] + "." + f.__name__
                    _stack.append([time.perf_counter(), 0.0, name])
                def on_end(self, ev):
                    t0, child, name = _stack.pop()
                    d = time.perf_counter() - t0
                    _incl[name] += d; _excl[name] += d - child; _count[name] += 1
                    if _stack:
                        _stack[-1][1] += d
            event.register("numba:compile", _Listener())
            """
        )
    tail = """
if "_excl" in globals():
    kernels = {k: [_excl[k], _incl[k], _count[k]] for k in _excl}
print("RESULT " + json.dumps({"first": first, "extra": extra, "kernels": kernels,
                              "numpy": globals().get("t_numpy", 0.0),
                              "cpu": globals().get("cpu", 0.0)}))
"""
    return head + textwrap.dedent(body) + tail


def run_row(
    body: str,
    layout: str = "",
    profile: bool = False,
    cache: str | None = None,
    root: str = ROOT,
) -> dict:
    """Run one row in a fresh process; a fresh empty cache unless ``cache`` is given;
    obbiou imported from ``root``."""
    own = cache is None
    cache = cache or tempfile.mkdtemp(prefix="obbiou-cold-")
    env = dict(os.environ, NUMBA_CACHE_DIR=cache)
    env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")
    try:
        done = subprocess.run(
            [sys.executable, "-c", _snippet(body, layout, profile)],
            capture_output=True,
            text=True,
            env=env,
            cwd=root,
        )
    finally:
        if own:
            shutil.rmtree(cache, ignore_errors=True)
    for line in done.stdout.splitlines():
        if line.startswith("RESULT "):
            return json.loads(line[7:])
    raise RuntimeError(f"row failed:\n{done.stdout}\n{done.stderr}")


def run_command(args: list[str]) -> float:
    """Wall time of ``python -m obbiou ARGS`` in a fresh process with an empty cache."""
    cache = tempfile.mkdtemp(prefix="obbiou-cold-")
    out = tempfile.mkdtemp(prefix="obbiou-cold-out-")
    env = dict(os.environ, NUMBA_CACHE_DIR=cache)
    env["PYTHONPATH"] = ROOT + os.pathsep + env.get("PYTHONPATH", "")
    t0 = time.perf_counter()
    try:
        subprocess.run(
            [sys.executable, "-m", "obbiou", *args],
            env=env,
            cwd=out,
            check=True,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        return time.perf_counter() - t0
    finally:
        shutil.rmtree(cache, ignore_errors=True)
        shutil.rmtree(out, ignore_errors=True)


def print_kernels(kernels: dict, top: int = 25) -> None:
    rows = sorted(kernels.items(), key=lambda kv: -kv[1][0])[:top]
    for name, (excl, incl, n) in rows:
        print(f"        {name:<44s} {excl:7.2f} s  (incl. {incl:6.2f} s)  n={n}")


# The rows of first calls: name, snippet, layout, goal (multiple of the unit).
ROWS = [
    ("iou rotated (3 x 3, then 300 x 300)", FIRST_IOU, "rotated", 4),
    ("iou polygon (3 x 3, then 300 x 300)", FIRST_IOU, "polygon", 4),
    ("iou upright (3 x 3, then 300 x 300)", FIRST_IOU, "upright", 4),
    ("overlapping_pairs rotated (50, then 30 000)", FIRST_PAIRS, "", 6),
    ("suppress hard rotated (50, then 30 000)", FIRST_SUPPRESS, "", 6),
    ("evaluate, small rotated table, 10 thresholds", FIRST_EVALUATE, "", 8),
]


def compare(rev: str, only: str, runs: int) -> None:
    """CPU seconds of the first-call rows, this tree against ``rev``, alternating."""
    other = tempfile.mkdtemp(prefix="obbiou-against-")
    done = subprocess.run(
        ["git", "worktree", "add", "--detach", "-q", other, rev],
        cwd=ROOT,
        capture_output=True,
        text=True,
    )
    if done.returncode != 0:
        shutil.rmtree(other, ignore_errors=True)
        sys.exit(f"coldstart.py: --against {rev}: no checkout of it: {done.stderr.strip()}")
    try:
        print(f"CPU seconds, median (range) of {runs} fresh processes each, alternating")
        print(f"{'first use, cold cache':<46s} {'this tree':>20s} {rev:>20s}")
        for name, body, layout, _ in ROWS:
            if only and only not in name:
                continue
            cpu: dict[str, list[float]] = {"this": [], "rev": []}
            for _ in range(runs):
                cpu["this"].append(run_row(body, layout)["cpu"])
                cpu["rev"].append(run_row(body, layout, root=other)["cpu"])
            cells = []
            for side in ("this", "rev"):
                v = sorted(cpu[side])
                cells.append(f"{v[len(v) // 2]:.2f} ({v[0]:.2f}-{v[-1]:.2f})")
            print(f"{name:<46s} {cells[0]:>20s} {cells[1]:>20s}", flush=True)
    finally:
        subprocess.run(["git", "worktree", "remove", "--force", other], cwd=ROOT, check=False)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--profile", action="store_true", help="print each kernel's compile time")
    parser.add_argument("--only", default="", help="run only rows whose name contains this")
    parser.add_argument("--against", metavar="REV", help="A/B: compare with a git revision")
    parser.add_argument("--runs", type=int, default=5, help="processes per side with --against")
    args = parser.parse_args()
    if args.against:
        compare(args.against, args.only, args.runs)
        return

    # The unit is the median of three fresh processes: one alone varied by a tenth
    # (0.48 - 0.54 s in three runs of the table), enough to flip a row near its goal.
    trivial = [run_row(TRIVIAL_PARALLEL) for _ in range(UNIT_RUNS)]
    unit = statistics.median(r["first"] for r in trivial)
    unit_cpu = statistics.median(r["cpu"] for r in trivial)
    spread = sorted(r["first"] for r in trivial)
    serial = run_row(TRIVIAL_SERIAL)["first"]
    print(
        f"unit: numba's compile of a trivial prange kernel, median of {UNIT_RUNS} fresh "
        f"processes: {unit:.2f} s ({unit_cpu:.2f} s CPU; range {spread[0]:.2f} - "
        f"{spread[-1]:.2f} s)"
    )
    print(f"      (a trivial serial kernel: {serial:.2f} s)")
    print("CPU: the process's CPU seconds over the same calls, and their multiple of the unit's")
    print("     CPU seconds (steadier than wall time on a machine others share)")
    print()
    print(f"{'first use, cold cache':<46s} {'seconds':>8s} {'x unit':>7s} {'goal':>6s}")

    def line(
        name: str, seconds: float, goal: float | None, note: str = "", cpu: float = 0.0
    ) -> None:
        mult = seconds / unit
        verdict = "" if goal is None else ("met" if mult <= goal else "NOT met")
        goal_s = "" if goal is None else f"<={goal:g}x"
        if cpu:
            note = f"[CPU {cpu:.2f} s = {cpu / unit_cpu:.1f}x] {note}"
        print(f"{name:<46s} {seconds:8.2f} {mult:6.1f}x {goal_s:>6s} {verdict} {note}", flush=True)

    for name, body, layout, goal in ROWS:
        if args.only and args.only not in name:
            continue
        r = run_row(body, layout, args.profile)
        total = r["first"] + r["extra"]
        note = (
            f"(first call {r['first']:.2f} s + larger call {r['extra']:.2f} s)"
            if r["extra"]
            else ""
        )
        line(name, total, goal, note, r["cpu"])
        if args.profile:
            print_kernels(r["kernels"])
    for name, cmd, goal in (("obbiou warmup", ["warmup"], 40), ("obbiou demo", ["demo"], 60)):
        if args.only and args.only not in name:
            continue
        line(name, run_command(cmd), goal)

    if not args.only or "import" in args.only:
        cache = tempfile.mkdtemp(prefix="obbiou-warm-")
        try:
            run_row(WARM_IMPORT, cache=cache)  # fills the cache
            runs = [run_row(WARM_IMPORT, cache=cache) for _ in range(5)]
        finally:
            shutil.rmtree(cache, ignore_errors=True)
        above = sorted(r["first"] - r["numpy"] for r in runs)
        print(
            f"{'import + first iou, warm cache, fresh process':<46s} "
            f"{above[len(above) // 2]:8.2f} s above `import numpy` (goal <= 0.5 s; "
            f"range {above[0]:.2f} - {above[-1]:.2f} over 5 processes)"
        )


if __name__ == "__main__":
    main()

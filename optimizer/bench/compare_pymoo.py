#!/usr/bin/env python3
"""Side-by-side benchmark: stria's NSGA-II (the `reference_front` example) against pymoo's
NSGA-II at the same budget (20,000 evaluations, population 100) on ZDT1, ZDT2, ZDT3 (30
variables) and DTLZ2 (3 objectives, 12 variables), over several seeds.

Hypervolume of both fronts is computed with moocore at the same reference point (1.1 in
every objective); docs/references.md#optimisation gives the analytic fronts' values. Wall time: for pymoo its
`minimize` call (imports excluded); for stria both the run as the example times it (`main`
from start to CSV written, the counterpart of `minimize`) and the whole example process as
this script sees it (spawn and start-up included, which does not favour stria). CPU time
(user + system; pymoo's `minimize`, stria's whole process) is reported too: on a shared,
loaded machine it is the steadier figure.

stria runs twice per seed: lean (`--front population`: no archive, no hypervolume history,
the final population's non-dominated members written, as pymoo runs and reports) and full
(`--front archive`: every non-dominated design seen kept, its exact hypervolume measured
every generation, and written). The lean run's final population is bit for bit the full
run's; the archive is the better front but costs time (about 5,000 points on DTLZ2).

Both use SBX (eta 20, probability 0.9) and polynomial mutation (eta 20, probability 1/n) with
duplicate elimination (pymoo's default SBX eta is 15; it is set to 20 here to match).

Needs: cargo, python3 with pymoo and moocore (`pip install pymoo moocore`; not part of CI).
Usage: python3 optimizer/bench/compare_pymoo.py [--seeds 5] [--out optimizer/bench/RESULTS.md]
"""

import argparse
import os
import re
import resource
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np
import moocore
from pymoo.algorithms.moo.nsga2 import NSGA2
from pymoo.operators.crossover.sbx import SBX
from pymoo.operators.mutation.pm import PM
from pymoo.optimize import minimize
from pymoo.problems import get_problem

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
EVALS = 20_000
POP = 100
PROBLEMS = {
    "zdt1": (lambda: get_problem("zdt1", n_var=30), 0.876667),
    "zdt2": (lambda: get_problem("zdt2", n_var=30), 0.543333),
    "zdt3": (lambda: get_problem("zdt3", n_var=30), 1.331761),
    "dtlz2": (lambda: get_problem("dtlz2", n_var=12, n_obj=3), 0.807401),
}


def build():
    subprocess.run(
        ["cargo", "build", "--release", "-q", "-p", "optimizer", "--example", "reference_front"],
        cwd=ROOT,
        check=True,
    )
    target = os.environ.get("CARGO_TARGET_DIR", os.path.join(ROOT, "target"))
    return os.path.join(target, "release", "examples", "reference_front")


def ours(exe, name, seed, front):
    """Front, process wall time, process CPU time, and the run's own wall time (from the
    start of `main` to the CSV written, as the example reports it: the counterpart of pymoo's
    `minimize` call, without process start-up)."""
    with tempfile.TemporaryDirectory() as d:
        out = os.path.join(d, "front.csv")
        r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        done = subprocess.run(
            [exe, "--problem", name, "--evals", str(EVALS), "--seed", str(seed),
             "--population", str(POP), "--front", front, "--out", out],
            check=True,
            stderr=subprocess.PIPE,
            text=True,
        )
        wall = time.perf_counter() - t0
        r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu = (r1.ru_utime - r0.ru_utime) + (r1.ru_stime - r0.ru_stime)
        run = float(re.search(r" in ([0-9.]+) s", done.stderr).group(1))
        return np.loadtxt(out, delimiter=",", skiprows=1, ndmin=2), wall, cpu, run


def pymoo_run(name, seed):
    problem = PROBLEMS[name][0]()
    algo = NSGA2(pop_size=POP, crossover=SBX(eta=20, prob=0.9), mutation=PM(eta=20),
                 eliminate_duplicates=True)
    c0 = time.process_time()
    t0 = time.perf_counter()
    res = minimize(problem, algo, ("n_eval", EVALS), seed=seed, verbose=False)
    wall = time.perf_counter() - t0
    cpu = time.process_time() - c0
    return np.asarray(res.F), wall, cpu


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=5)
    ap.add_argument("--out", default=None)
    args = ap.parse_args()
    exe = build()
    load0 = os.getloadavg()[0]
    rows = []
    for name, (_, hv_exact) in PROBLEMS.items():
        m = 3 if name == "dtlz2" else 2
        ref = [1.1] * m
        r = {k: [] for k in ("hv_lean", "hv_arch", "hv_py", "t_lean", "t_arch", "t_py",
                             "c_lean", "c_arch", "c_py", "u_lean", "u_arch")}
        for seed in range(1, args.seeds + 1):
            f, t, c, u = ours(exe, name, seed, "population")
            fa, ta, ca, ua = ours(exe, name, seed, "archive")
            fp, tp, cp = pymoo_run(name, seed)
            r["hv_lean"].append(moocore.hypervolume(f, ref=ref))
            r["hv_arch"].append(moocore.hypervolume(fa, ref=ref))
            r["hv_py"].append(moocore.hypervolume(fp, ref=ref))
            for key, v in (("t_lean", t), ("t_arch", ta), ("t_py", tp), ("c_lean", c),
                           ("c_arch", ca), ("c_py", cp), ("u_lean", u), ("u_arch", ua)):
                r[key].append(v)
            print(f"{name} seed {seed}: HV lean {r['hv_lean'][-1]:.5f}, archive "
                  f"{r['hv_arch'][-1]:.5f}, pymoo {r['hv_py'][-1]:.5f}; wall lean {t:.3f} s, "
                  f"archive {ta:.3f} s, pymoo {tp:.2f} s", file=sys.stderr)
        rows.append((name, hv_exact, r))

    mean = statistics.mean
    lines = [
        f"Benchmark: NSGA-II, {EVALS} evaluations, population {POP}, seeds 1-{args.seeds}. "
        "stria lean = no archive, no hypervolume history, final population's non-dominated "
        "members (as pymoo); stria full = archive kept and its exact hypervolume measured "
        "every generation, archive written.",
        "",
        "Hypervolume by moocore at reference 1.1 in every objective (mean over seeds, min-max "
        "in brackets); analytic front HV from docs/references.md#optimisation.",
        "",
        "| problem | HV analytic | HV stria lean (final population) | HV stria full (archive) "
        "| HV pymoo (final population) |",
        "|---|---|---|---|---|",
    ]

    def cell(v):
        return f"{mean(v):.5f} [{min(v):.5f}-{max(v):.5f}]"

    for name, hv_exact, r in rows:
        lines.append(f"| {name} | {hv_exact} | {cell(r['hv_lean'])} | {cell(r['hv_arch'])} | "
                     f"{cell(r['hv_py'])} |")
    lines += [
        "",
        "Wall time per run, mean over seeds (s); speed-up = pymoo / stria. \"run\": stria's "
        "`main` from start to CSV written (as the example reports it), the counterpart of "
        "pymoo's `minimize` call; \"process\": the whole stria process as the script sees it "
        "(spawn, start-up, run, CSV write, exit).",
        "",
        "| problem | pymoo `minimize` | stria lean run | stria lean process | stria full run | "
        "stria full process | speed-up lean (run / process) | speed-up full (run / process) |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for name, _, r in rows:
        t = {k: mean(v) for k, v in r.items()}
        lines.append(
            f"| {name} | {t['t_py']:.3f} | {t['u_lean']:.4f} | {t['t_lean']:.4f} | "
            f"{t['u_arch']:.4f} | {t['t_arch']:.4f} | "
            f"{t['t_py'] / t['u_lean']:.0f}x / {t['t_py'] / t['t_lean']:.0f}x | "
            f"{t['t_py'] / t['u_arch']:.0f}x / {t['t_py'] / t['t_arch']:.0f}x |"
        )
    lines += [
        "",
        "CPU time (user + system) per run, mean over seeds (s): pymoo's `minimize` call, the "
        "whole stria process.",
        "",
        "| problem | pymoo | stria lean | stria full | speed-up lean | speed-up full |",
        "|---|---|---|---|---|---|",
    ]
    for name, _, r in rows:
        t = {k: mean(v) for k, v in r.items()}
        lines.append(
            f"| {name} | {t['c_py']:.3f} | {t['c_lean']:.4f} | {t['c_arch']:.4f} | "
            f"{t['c_py'] / t['c_lean']:.0f}x | {t['c_py'] / t['c_arch']:.0f}x |"
        )
    lines += [
        "",
        f"Machine: {os.cpu_count()} logical CPUs, shared with other work while measured "
        f"(load average {load0:.1f} at the start, {os.getloadavg()[0]:.1f} at the end); "
        "pymoo's times exclude its interpreter start-up and imports. On a loaded machine CPU "
        "time is the steadier figure.",
    ]
    text = "\n".join(lines) + "\n"
    print(text)
    if args.out:
        with open(args.out + ".tmp", "w") as fh:
            fh.write(text)
        os.replace(args.out + ".tmp", args.out)


if __name__ == "__main__":
    main()

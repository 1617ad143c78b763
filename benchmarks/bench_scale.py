"""Benchmark of long series: time and peak memory at n = 10^5, 10^6, 10^7 rows, k = 10 columns.

Cases (each in a fresh subprocess, so one case's memory never counts towards another's):

* ``durbin_watson``: the exact test alone, ``durbin_watson(resid, exog)`` on arrays (OLS residuals of
  white-noise errors, so the p-value lies in the body of the distribution);
* ``diagnose white``: ``diagnose`` on a DataFrame (response and 9 predictors, a constant is
  added) with white-noise errors, so the corrections do not run (unless the verdict finds
  evidence by chance);
* ``diagnose AR(1)``: the same with AR(1) errors, rho = 0.5, so the corrections (HAC, Prais-Winsten)
  run.

Memory is the resident set size: the child builds its input, collects garbage, notes its
resident size and resets the kernel's high-water mark (``/proc/self/clear_refs``), then runs the
case; "peak" is the high-water mark minus the resident size after the input was built, "held" the
resident size after the call, with its result still referenced, minus the same.  ``--tracemalloc``
also reports the peak of memory traced by Python's tracemalloc (numpy's buffers included) in a
separate run, which is slower.

``--baseline-src DIR`` runs every case a second time with another source tree first on the path
(for example an export of main's ``src``) and prints the ratios from the same run: the machine is
shared, so ratios measured side by side mean more than absolute times.

Usage: python benchmarks/bench_scale.py [--sizes 1e5,1e6,1e7] [--cases dw,white,ar1]
       [--baseline-src DIR] [--tracemalloc] [--quick]
"""

from __future__ import annotations

import argparse
import gc
import json
import os
import subprocess
import sys
import time

K = 10  # columns of the design, the constant included
RHO = 0.5  # AR(1) coefficient of the correlated errors
CASES = {"dw": "durbin_watson", "white": "diagnose white", "ar1": "diagnose AR(1)"}
HERE = os.path.dirname(os.path.abspath(__file__))
SRC = os.path.join(os.path.dirname(HERE), "src")


# ----------------------------------------------------------------------------- child side
def _status() -> dict:
    out = {}
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith(("VmHWM", "VmRSS")):
                key, value = line.split(":")
                out[key] = int(value.split()[0]) * 1024
    return out


def _reset_peak() -> bool:
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")
        return True
    except OSError:
        return False


def _build(case: str, n: int, seed: int = 12345):
    """Invented data: 9 standard-normal predictors, unit coefficients, errors white or AR(1)."""
    import numpy as np
    import pandas as pd
    from scipy.signal import lfilter

    rng = np.random.default_rng(seed)
    values = np.empty((n, K), order="F")  # response first, then the predictors
    for j in range(1, K):
        rng.standard_normal(out=values[:, j])
    noise = rng.standard_normal(n)
    if case == "ar1":
        noise = lfilter([1.0], [1.0, -RHO], noise)
    values[:, 0] = 1.0 + values[:, 1:].sum(axis=1) + noise
    del noise
    names = ["y"] + [f"x{j}" for j in range(1, K)]
    if case == "dw":
        X = values.copy()
        X[:, 0] = 1.0
        y = values[:, 0].copy()
        del values
        beta = np.linalg.solve(X.T @ X, X.T @ y)
        resid = y - X @ beta
        return {"resid": resid, "exog": X}, resid.nbytes + X.nbytes
    frame = pd.DataFrame(values, columns=names, copy=True)
    del values
    return {"frame": frame, "predictors": names[1:]}, int(frame.memory_usage(deep=True).sum())


def _run(case: str, inputs: dict):
    import lagsight

    if case == "dw":
        res = lagsight.durbin_watson(inputs["resid"], inputs["exog"])
        return f"d = {res.statistic:.6f}, p = {res.pvalue:.4g}", res
    d = lagsight.diagnose(inputs["frame"], response="y", predictors=inputs["predictors"])
    fixes = "corrections" if d.remedies is not None else "no corrections"
    return f"{d.verdict.finding}, {fixes}", d


def child(case: str, n: int, traced: bool) -> dict:
    import lagsight  # imported before the baseline so that module memory is not counted
    import lagsight.diagnosis  # noqa: F401

    inputs, size = _build(case, n)
    gc.collect()
    base = _status()["VmRSS"]
    can_reset = _reset_peak()
    if traced:
        import tracemalloc

        tracemalloc.start()
    t0 = time.perf_counter()
    summary, result = _run(case, inputs)
    seconds = time.perf_counter() - t0
    out = {"seconds": seconds, "summary": summary, "input": size, "rss0": base, "lagsight": lagsight.__file__}
    if traced:
        out["traced_peak"] = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    gc.collect()
    st = _status()
    out["peak"] = st["VmHWM"] - base if can_reset else None
    out["held"] = st["VmRSS"] - base  # with the result still referenced
    del result
    return out


# ----------------------------------------------------------------------------- parent side
def measure(case: str, n: int, src: str, traced: bool = False) -> dict:
    env = dict(os.environ, PYTHONPATH=src + os.pathsep + os.environ.get("PYTHONPATH", ""))
    cmd = [sys.executable, os.path.abspath(__file__), "--child", case, str(n)] + (["--tracemalloc"] if traced else [])
    proc = subprocess.run(cmd, env=env, capture_output=True, text=True)
    if proc.returncode != 0:
        tail = (proc.stderr.strip().splitlines() or ["(no output)"])[-1]
        return {"error": f"exit {proc.returncode}: {tail}"}
    return json.loads(proc.stdout.strip().splitlines()[-1])


def _gb(v) -> str:
    return "    n/a" if v is None else f"{v / 2**30:7.2f}"


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="1e5,1e6,1e7", help="comma-separated row counts (default 1e5,1e6,1e7)")
    ap.add_argument("--cases", default="dw,white,ar1", help="comma-separated: dw, white, ar1 (default all)")
    ap.add_argument("--baseline-src", default=None, help="another source tree to compare with, run side by side")
    ap.add_argument("--tracemalloc", action="store_true", help="also report the tracemalloc peak (extra run)")
    ap.add_argument("--quick", action="store_true", help="n = 1e5 only")
    args = ap.parse_args(argv)
    sizes = [10**5] if args.quick else [int(float(s)) for s in args.sizes.split(",") if s.strip()]
    cases = [c.strip() for c in args.cases.split(",") if c.strip()]
    for c in cases:
        if c not in CASES:
            ap.error(f"unknown case {c!r} (choose from {', '.join(CASES)})")
    print(f"k = {K} columns (constant included); AR(1) rho = {RHO}; memory in GiB beyond the input")
    head = f"{'case':<16} {'n':>9} {'input':>7} {'seconds':>8} {'peak':>7} {'held':>7}"
    if args.tracemalloc:
        head += f" {'traced':>7}"
    if args.baseline_src:
        head += f" | {'base s':>7} {'peak':>7} | {'time x':>6} {'peak x':>6}"
    print(head + "   result")
    for n in sizes:
        for c in cases:
            r = measure(c, n, SRC)
            if "error" in r:
                print(f"{CASES[c]:<16} {n:>9} {'':>7} failed: {r['error']}", flush=True)
                continue
            line = f"{CASES[c]:<16} {n:>9} {_gb(r['input'])} {r['seconds']:>8.2f} {_gb(r['peak'])} {_gb(r['held'])}"
            if args.tracemalloc:
                t = measure(c, n, SRC, traced=True)
                line += f" {_gb(t.get('traced_peak'))}"
            if args.baseline_src:
                b = measure(c, n, os.path.abspath(args.baseline_src))
                if "error" in b:
                    line += f" | baseline failed: {b['error']}"
                else:
                    ratio_p = (r["peak"] / b["peak"]) if r["peak"] and b["peak"] else float("nan")
                    line += (
                        f" | {b['seconds']:>7.2f} {_gb(b['peak'])} | {r['seconds'] / b['seconds']:>6.2f}"
                        f" {ratio_p:>6.2f}"
                    )
            print(line + f"   {r['summary']}", flush=True)


if __name__ == "__main__":
    if len(sys.argv) >= 4 and sys.argv[1] == "--child":
        print(json.dumps(child(sys.argv[2], int(sys.argv[3]), "--tracemalloc" in sys.argv)))
    else:
        main()

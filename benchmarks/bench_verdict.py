"""Size and power of the verdict (a simulation that prints a table, not a timed test).

For each invented design (tests/verdict_designs.py) the library's ``diagnose`` (remedies off) runs on
seeded draws: the share of "evidence" on white-noise errors at alpha = 0.05 with its Monte Carlo
standard error, and against AR(1) errors (rho = 0.2, 0.4) next to the leading test alone.

Usage: python benchmarks/bench_verdict.py [--quick]
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from verdict_designs import DESIGNS, simulate  # noqa: E402

ALPHA = 0.05


def main(quick: bool = False) -> None:
    null_reps, power_reps = (60, 40) if quick else (400, 200)
    print(f"verdict size and power at alpha = {ALPHA} ({null_reps} white-noise draws, {power_reps} per rho; seeded)")
    head = (
        f"{'design':<44} {'n':>5}  {'rule':<60} {'size':>6} {'MC SE':>6}   "
        f"{'rho=0.2 verdict/lead':>20}   {'rho=0.4 verdict/lead':>20}"
    )
    print(head)
    print("-" * len(head))
    start = time.perf_counter()
    for i, design in enumerate(DESIGNS):
        null = simulate(design, 0.0, null_reps, seed=1000 + i, alpha=ALPHA)
        cells = []
        for j, rho in enumerate((0.2, 0.4)):
            r = simulate(design, rho, power_reps, seed=2000 + 10 * i + j, alpha=ALPHA)
            cells.append(f"{r.verdict:.3f} / {r.leading:.3f}")
        print(
            f"{design.name:<44} {design.n:>5}  {null.rule:<60} {null.verdict:>6.3f} {null.se:>6.3f}   "
            f"{cells[0]:>20}   {cells[1]:>20}"
        )
    print(
        f"({time.perf_counter() - start:.0f} s; 'lead' = the leading test's own p-value below alpha, "
        "before Holm's adjustment)"
    )


if __name__ == "__main__":
    warnings.simplefilter("ignore")
    main(quick="--quick" in sys.argv)

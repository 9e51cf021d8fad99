"""Energy balance against the length of free vibration (run by hand).

    python benchmarks/energy_periods.py

A 1 Hz lightly damped oscillator after a short rectangle pulse, over windows of 10 … 10⁷
periods: the energy balance integrates every interval in closed form, so its time and
memory should not grow with the window (target: the 10⁷-period window within 2× the
10-period one). Times and tracemalloc peaks are printed as ratios to the shortest window,
measured in the same run; never asserted in the test suite.
"""

from __future__ import annotations

import time
import tracemalloc

import closedform
from closedform.checks.energy import energy_checks

CASE = """
title = "energy periods"
[system]
model = "spring-mass-damper"
mass = "1 kg"
stiffness = "39.47841760435743 N/m"
damping_ratio = 1e-6
[[load]]
shape = "rectangle"
duration = "0.3 s"
amplitude = "1 N"
[report]
until = "{until} s"
"""


def measure(periods: int) -> tuple[float, int, bool]:
    derivation = closedform.derive(closedform.load_case(CASE.format(until=periods)))
    tracemalloc.start()
    start = time.perf_counter()
    checks = energy_checks(derivation)
    elapsed = time.perf_counter() - start
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return elapsed, peak, all(c.passed for c in checks)


def main() -> None:
    rows = [(n, *measure(n)) for n in (10, 1_000, 100_000, 10_000_000)]
    base_time, base_memory = rows[0][1], rows[0][2]
    print("periods | energy balance | ratio | tracemalloc peak | ratio | passed")
    for periods, elapsed, peak, passed in rows:
        print(f"{periods:>10} | {elapsed * 1000:8.1f} ms | {elapsed / base_time:5.2f} | "
              f"{peak / 1024:8.0f} KiB | {peak / base_memory:5.2f} | {passed}")
    worst = max(r[1] for r in rows) / base_time
    print(f"largest time ratio {worst:.2f} (target <= 2)")


if __name__ == "__main__":
    main()

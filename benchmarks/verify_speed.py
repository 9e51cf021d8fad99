"""How much the independent verification adds to derive() on a typical single-pulse case.

Run from the repository root::

    python benchmarks/verify_speed.py [--repeat 5]

derive() calls closedform.verify.verify at its end; "without verification" replaces that
call by one returning no checks (the Derivation is then simply "failed", which does not
matter for timing). Each variant is run ``--repeat`` times, alternating, and the fastest run
of each is reported (sympy's caches make later runs faster; alternating keeps that fair).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import closedform.derivation as derivation_module  # noqa: E402
from closedform.case import load_case  # noqa: E402
from closedform.verify import verify  # noqa: E402

# A machine skid struck by a short half-sine pulse: a damped oscillator, window ≈ 10 periods.
CASE = """
title = "benchmark: half-sine pulse on a damped oscillator"
[system]
model = "spring-mass-damper"
mass = "420 kg"
stiffness = "2.6 MN/m"
damping_ratio = 0.02
[[load]]
shape = "half-sine"
at = "20 ms"
duration = "1.5 ms"
impulse = "95 N*s"
[report]
until = "800 ms"
"""


def timed(with_checks: bool) -> tuple[float, int]:
    derivation_module.verify = verify if with_checks else (lambda _partial: [])
    case = load_case("", text=CASE, name="benchmark.toml")
    began = time.perf_counter()
    result = derivation_module.derive(case)
    return time.perf_counter() - began, len(result.checks)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    arguments = parser.parse_args()
    without, with_ = [], []
    checks = 0
    try:
        for _ in range(arguments.repeat):
            without.append(timed(False)[0])
            elapsed, checks = timed(True)
            with_.append(elapsed)
    finally:
        derivation_module.verify = verify
    plain, checked = min(without), min(with_)
    print(f"derive() without verification: {plain:8.3f} s  (fastest of {arguments.repeat})")
    print(f"derive() with verification:    {checked:8.3f} s  ({checks} checks)")
    print(f"verification alone:            {checked - plain:8.3f} s")
    print(f"ratio with/without:            {checked / plain:8.2f}")


if __name__ == "__main__":
    main()

"""How much the independent verification adds to derive(): a typical single-pulse case and
long measured-looking load histories.

Run from the repository root::

    python benchmarks/verify_speed.py [--repeat 5] [--segments 100,1000] [--per-piece]

Single pulse: derive() runs closedform.checks.verification.verify (the registry's
"verification" family) after the results; "without verification" replaces that family's run
by one returning no checks (the Derivation is then simply "failed", which
does not matter for timing). Each variant is run ``--repeat`` times, alternating, and the
fastest run of each is reported (sympy's caches make later runs faster; alternating keeps
that fair).

Long histories: a table load of N segments (0.5 ms rows of an invented force history, as in
benchmarks/scale.py) on m = 750 kg, k = 3.1 MN/m, ζ = 0.05. derive() runs without
verification, then verify() is timed on its own. ``--per-piece`` also times the per-piece
route used for short histories (one sympy-differentiated check per piece) on the same
derivation, for comparison: minutes for N = 1000, so only sensible for small N.
"""

from __future__ import annotations

import argparse
import math
import random
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import dataclasses  # noqa: E402

import closedform.derivation as derivation_module  # noqa: E402
from closedform.case import load_case  # noqa: E402
from closedform.checks import long as long_route  # noqa: E402
from closedform.checks import registry  # noqa: E402
from closedform.checks.verification import verify  # noqa: E402


def set_verification(run) -> None:
    """Put ``run`` in place of the registry's verification family."""
    registry.FAMILIES = tuple(dataclasses.replace(f, run=run) if f.name == "verification" else f
                              for f in registry.FAMILIES)

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


def long_case(segments: int, seed: int = 7) -> str:
    """A table load of ``segments`` 0.5 ms segments: smooth swell + ripple + noise, zero at
    both ends (the recipe of benchmarks/scale.py), written inline in SI units."""
    rng = random.Random(seed + segments)
    points = []
    for i in range(segments + 1):
        value = 0.0 if i in (0, segments) else max(
            0.0, 6 + 5 * math.sin(i / 17) + 3 * math.sin(i / 5.3) + rng.uniform(-0.5, 0.5))
        points.append(f"[{i * 0.0005:.4f}, {1000 * round(value, 3):g}]")
    return f"""
title = "benchmark: measured-looking history, {segments} segments"
[system]
model = "spring-mass-damper"
mass = "750 kg"
stiffness = "3.1 MN/m"
damping_ratio = 0.05
[[load]]
shape = "table"
points = [{", ".join(points)}]
[report]
until = "{segments * 0.5 + 100:g} ms"
"""


def timed(with_checks: bool) -> tuple[float, int]:
    set_verification(verify if with_checks else (lambda _partial: []))
    case = load_case("", text=CASE, name="benchmark.toml")
    began = time.perf_counter()
    result = derivation_module.derive(case)
    return time.perf_counter() - began, len(result.checks)


def single_pulse(repeat: int) -> None:
    without, with_ = [], []
    checks = 0
    try:
        for _ in range(repeat):
            without.append(timed(False)[0])
            elapsed, checks = timed(True)
            with_.append(elapsed)
    finally:
        set_verification(verify)
    plain, checked = min(without), min(with_)
    print(f"derive() without verification: {plain:8.3f} s  (fastest of {repeat})")
    print(f"derive() with verification:    {checked:8.3f} s  ({checks} checks)")
    print(f"verification alone:            {checked - plain:8.3f} s")
    print(f"ratio with/without:            {checked / plain:8.2f}")


def long_history(segments: int, per_piece: bool) -> None:
    case = load_case("", text=long_case(segments), name=f"history-{segments}.toml")
    set_verification(lambda _partial: [])
    try:
        began = time.perf_counter()
        derivation = derivation_module.derive(case, time_budget=None)
        derived = time.perf_counter() - began
    finally:
        set_verification(verify)
    began = time.perf_counter()
    checks = verify(derivation)
    verified = time.perf_counter() - began
    failed = sum(not c.passed for c in checks)
    print(f"N = {segments:5d} segments, {len(derivation.pieces)} pieces: derive() without "
          f"verification {derived:7.2f} s, verify() {verified:7.2f} s ({len(checks)} checks, "
          f"{'all passed' if not failed else f'{failed} FAILED'})")
    if per_piece:
        saved = long_route.LONG_HISTORY
        long_route.LONG_HISTORY = len(derivation.pieces)
        try:
            began = time.perf_counter()
            checks = verify(derivation)
            elapsed = time.perf_counter() - began
        finally:
            long_route.LONG_HISTORY = saved
        failed = sum(not c.passed for c in checks)
        print(f"{'':>7s}per-piece route on the same derivation: {elapsed:7.2f} s "
              f"({len(checks)} checks, {'all passed' if not failed else f'{failed} FAILED'})")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--segments", default="100,1000",
                        help="comma-separated segment counts of the long histories ('' for none)")
    parser.add_argument("--per-piece", action="store_true",
                        help="also time the per-piece route of short histories (slow)")
    arguments = parser.parse_args()
    single_pulse(arguments.repeat)
    for segments in [int(n) for n in arguments.segments.split(",") if n.strip()]:
        long_history(segments, arguments.per_piece)


if __name__ == "__main__":
    main()

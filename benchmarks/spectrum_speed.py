"""Time a 1000-point shock spectrum from the closed form against a numerical-integration
sweep of the same points (scipy solve_ivp) in the same process.

    python benchmarks/spectrum_speed.py [--shape half-sine] [--damping-ratio 0.05]
                                        [--range 0.05:5:1000]

Prints the time of each, their ratio, and the largest difference of the DLFs (the sweep
finds each peak from its velocity-zero events, with rtol = 1e-10). Target: the closed form
under 5 s for 1000 points. Wall-clock and CPU times are both shown, since a loaded machine
stretches the first.
"""

from __future__ import annotations

import argparse
import math
import time

import numpy
from scipy.integrate import solve_ivp

from closedform.spectrum import Pulse, parse_range, response_spectrum

TARGET_SECONDS = 5.0


def load_function(shape: str, duration: float, peak_at: float):
    if shape == "rectangle":
        return lambda t: 1.0
    if shape == "decay":
        return lambda t: 1.0 - t / duration
    if shape == "half-sine":
        return lambda t: math.sin(math.pi * t / duration)
    peak = peak_at * duration
    return lambda t: t / peak if t < peak else (duration - t) / (duration - peak)


def integrated_dlf(shape: str, zeta: float, ratio: float, peak_at: float = 0.5) -> float:
    """Peak |x| of x″ + 2ζx′ + x = f(t) (ω_n = 1) over the pulse and one natural period after
    it, from the velocity zeros found as integration events."""
    duration = 2 * math.pi * ratio
    force = load_function(shape, duration, peak_at)
    breaks = [0.0, duration, duration + 2 * math.pi]
    if shape == "triangle" and 0 < peak_at < 1:
        breaks.insert(1, peak_at * duration)

    def velocity_zero(_t, y):
        return y[1]

    state = numpy.zeros(2)
    largest = 0.0
    for start, end in zip(breaks, breaks[1:]):
        load = force if start < duration else (lambda t: 0.0)
        solution = solve_ivp(lambda t, y, load=load: [y[1], load(t) - 2 * zeta * y[1] - y[0]],
                             (start, end), state, method="DOP853", rtol=1e-10, atol=1e-13,
                             events=velocity_zero)
        states = [solution.y[:, -1]] + list(solution.y_events[0])
        largest = max([largest] + [abs(s[0]) for s in states])
        state = solution.y[:, -1]
    return largest


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shape", default="half-sine",
                        choices=["rectangle", "triangle", "decay", "half-sine"])
    parser.add_argument("--damping-ratio", default="0.05")
    parser.add_argument("--range", dest="ratio_range", default="0.05:5:1000")
    arguments = parser.parse_args()
    from fractions import Fraction

    import sympy

    zeta = sympy.Rational(str(Fraction(arguments.damping_ratio)))
    ratios = parse_range(arguments.ratio_range)

    wall, cpu = time.perf_counter(), time.process_time()
    spectrum = response_spectrum(Pulse(arguments.shape), zeta, ratios)
    closed_wall, closed_cpu = time.perf_counter() - wall, time.process_time() - cpu

    wall, cpu = time.perf_counter(), time.process_time()
    swept = [integrated_dlf(arguments.shape, float(zeta), float(r)) for r in ratios]
    sweep_wall, sweep_cpu = time.perf_counter() - wall, time.process_time() - cpu

    difference = max(abs(p.dlf - s) / p.dlf for p, s in zip(spectrum.points, swept))
    print(f"{arguments.shape}, damping ratio {arguments.damping_ratio}, {len(ratios)} points "
          f"t_d/T_n = {float(ratios[0]):g} … {float(ratios[-1]):g}")
    print(f"closed form (one derivation in t_d/T_n, 30 digits): {closed_wall:6.2f} s wall, "
          f"{closed_cpu:6.2f} s CPU  (target < {TARGET_SECONDS:g} s)")
    print(f"solve_ivp sweep (DOP853, rtol 1e-10):               {sweep_wall:6.2f} s wall, "
          f"{sweep_cpu:6.2f} s CPU")
    print(f"ratio sweep / closed form: {sweep_wall / closed_wall:.2f} (wall), "
          f"{sweep_cpu / closed_cpu:.2f} (CPU)")
    print(f"largest relative DLF difference, sweep vs closed form: {difference:.1e}")


if __name__ == "__main__":
    main()

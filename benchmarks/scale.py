"""Scale benchmark (run by hand): long load histories and batches.

    python benchmarks/scale.py            # everything
    python benchmarks/scale.py --quick    # skip the generic-sympy comparison and the batch

Prints, in one run:
  * derive + verify wall time and peak memory for N = 10, 100, 1000 segments of an
    invented, measured-looking force history on a damped spring-mass-damper (each N in a
    fresh process, so peak memory is that case's own);
  * the growth ratio from N = 100 to N = 1000 (target: no worse than linear, <= 15);
  * the ratio against sympy's generic laplace_transform + inverse_laplace_transform route on
    the same N = 100 history (target >= 10; the generic route is stopped after a time limit
    and the ratio is then a lower bound);
  * a 50-case appendix (Markdown + LaTeX) with 1 process and with all cores (target >= 1.6x).
Targets are checked here, never by timed assertions in the test suite.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import random
import subprocess
import sys
import tempfile
from pathlib import Path

GENERIC_LIMIT = 600.0   # seconds allowed to the generic sympy route


def write_history(folder: Path, segments: int, seed: int = 7) -> Path:
    """An invented force history: smooth swell + ripple + noise, zero at both ends."""
    rng = random.Random(seed + segments)
    rows = ["time [ms], force [kN]"]
    for i in range(segments + 1):
        value = 0.0 if i in (0, segments) else max(
            0.0, 6 + 5 * math.sin(i / 17) + 3 * math.sin(i / 5.3) + rng.uniform(-0.5, 0.5))
        rows.append(f"{i * 0.5:g}, {value:.3f}")
    (folder / f"history-{segments}.csv").write_text("\n".join(rows) + "\n")
    case = folder / f"history-{segments}.toml"
    case.write_text(f"""title = "Measured-looking history, {segments} segments"
[system]
model = "spring-mass-damper"
mass = "750 kg"
stiffness = "3.1 MN/m"
damping_ratio = 0.05
[[load]]
shape = "table"
csv = "history-{segments}.csv"
[report]
until = "{segments * 0.5 + 100:g} ms"
""")
    return case


CHILD = r"""
import json, resource, sys, time
start = time.perf_counter()
import closedform
case = closedform.load_case(sys.argv[1])
loaded = time.perf_counter()
derivation = closedform.derive(case, time_budget=None)
done = time.perf_counter()
peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
figures = {"seconds": done - start, "derive": done - loaded, "status": derivation.status,
           "pieces": len(derivation.pieces), "peak_mb": peak_mb}
if len(sys.argv) > 2:      # after the timing: compare with an independent integration
    sys.path.insert(0, sys.argv[2])
    from scale import independent_difference
    figures["difference"] = independent_difference(case, derivation)
print(json.dumps(figures))
"""


def measure(case: Path, compare: bool = False) -> dict:
    extra = [str(Path(__file__).resolve().parent)] if compare else []
    output = subprocess.run([sys.executable, "-c", CHILD, str(case), *extra], check=True,
                            capture_output=True, text=True).stdout
    return json.loads(output.strip().splitlines()[-1])


def independent_difference(case, derivation, samples: int = 3000) -> float:
    """max |x_closedform − x_scipy| / max |x_scipy| at ``samples`` times spread over the
    window, x_scipy from scipy's solve_ivp (DOP853, rtol 1e-12) integrated table segment by
    table segment (the load linear on each, read from the table itself, not from closedform's
    rewrite), then freely to the end of the window."""
    import mpmath
    import numpy
    from scipy.integrate import solve_ivp

    (load,) = case.loads
    m, k = (float(case.system.parameters[n]) for n in ("mass", "stiffness"))
    c = 2 * float(case.system.parameters["damping_ratio"]) * (k * m) ** 0.5
    knots = [(float(t), float(v)) for t, v in load.points]
    until = float(derivation.window.until)
    times = numpy.linspace(0, until, samples + 2)[1:-1]
    spans = [(t0, t1, v0, (v1 - v0) / (t1 - t0)) for (t0, v0), (t1, v1)
             in zip(knots, knots[1:]) if t1 > t0] + [(knots[-1][0], until, 0.0, 0.0)]
    state, reference = [0.0, 0.0], numpy.empty_like(times)
    for t0, t1, v0, slope in spans:
        inside = (times >= t0) & (times < t1)
        solution = solve_ivp(lambda t, y, t0=t0, v0=v0, slope=slope:
                             [y[1], (v0 + slope * (t - t0) - c * y[1] - k * y[0]) / m],
                             (t0, t1), state, method="DOP853", rtol=1e-12, atol=1e-18,
                             t_eval=times[inside] if inside.any() else None)
        if inside.any():
            reference[inside] = solution.y[0][:inside.sum()]
        final = solve_ivp(lambda t, y, t0=t0, v0=v0, slope=slope:
                          [y[1], (v0 + slope * (t - t0) - c * y[1] - k * y[0]) / m],
                          (t0, t1), state, method="DOP853", rtol=1e-12, atol=1e-18)
        state = list(final.y[:, -1])
    starts = [float(p.start) for p in derivation.pieces]
    ours = numpy.empty_like(times)
    for i, at in enumerate(times):
        index = max(0, numpy.searchsorted(starts, at, side="right") - 1)
        piece = derivation.pieces[index]
        function = piece.numeric if piece.numeric is not None else piece.local.numeric({}, 30)
        ours[i] = float(function(mpmath.mpf(at) - mpmath.mpf(str(piece.start))))
    return float(numpy.max(numpy.abs(ours - reference)) / numpy.max(numpy.abs(reference)))


GENERIC = r"""
import sys, time, sympy
from closedform.case import load_case
case = load_case(sys.argv[1])
(load,) = case.loads
t, s = sympy.symbols("t s", positive=True)
m, c, k = (case.system.parameters[n] for n in ("mass", "damping", "stiffness"))
points = load.points
f = 0
for (t0, v0), (t1, v1) in zip(points, points[1:]):
    slope = (v1 - v0) / (t1 - t0)
    f += (v0 + slope * (t - t0)) * (sympy.Heaviside(t - t0) - sympy.Heaviside(t - t1))
start = time.perf_counter()
F = sympy.laplace_transform(f, t, s, noconds=True)
x = sympy.inverse_laplace_transform(F / (m * s**2 + c * s + k), s, t)
print(time.perf_counter() - start)
"""


def generic_seconds(case: Path) -> tuple[float, bool]:
    try:
        output = subprocess.run([sys.executable, "-c", GENERIC, str(case)], check=True,
                                capture_output=True, text=True, timeout=GENERIC_LIMIT).stdout
        return float(output.strip().splitlines()[-1]), True
    except subprocess.TimeoutExpired:
        return GENERIC_LIMIT, False


PULSES = (
    'shape = "rectangle"\nat = "{at} ms"\nduration = "{duration} ms"\namplitude = "{force} kN"',
    'shape = "half-sine"\nat = "{at} ms"\nduration = "{duration} ms"\namplitude = "{force} kN"',
    'shape = "triangle"\nat = "{at} ms"\nduration = "{duration} ms"\npeak_at = 0.3\n'
    'amplitude = "{force} kN"',
    'shape = "trapezoid"\nat = "{at} ms"\nrise = "{rise} ms"\nhold = "{duration} ms"\n'
    'fall = "{rise} ms"\namplitude = "{force} kN"',
    'shape = "impulse"\nat = "{at} ms"\nimpulse = "{impulse} N*s"',
)


def write_package(folder: Path, count: int = 50) -> None:
    """A package of ``count`` distinct invented cases (no two alike, so no run profits from
    another's cached algebra): spring-mass-dampers under one or two pulses."""
    for i in range(count):
        numbers = {"at": 5 + i % 7, "duration": 2 + (i * 3) % 11, "force": 10 + (i * 7) % 23,
                   "rise": 1 + i % 3, "impulse": 20 + (i * 11) % 37}
        loads = [PULSES[i % len(PULSES)]]
        if i % 3 == 0:
            loads.append(PULSES[(i + 2) % len(PULSES)])
        blocks = "\n".join("[[load]]\n" + load.format(**numbers) for load in loads)
        (folder / f"case-{i:02d}.toml").write_text(
            f'title = "Package case {i + 1}"\n[system]\nmodel = "spring-mass-damper"\n'
            f'mass = "{200 + 13 * i} kg"\nstiffness = "{1 + (i * 17) % 29 / 10} MN/m"\n'
            f"damping_ratio = {0.01 + (i % 9) / 100}\n{blocks}\n")


APPENDIX = r"""
import sys, time
from pathlib import Path
from closedform.appendix import build_appendix
start = time.perf_counter()
contents, entries, unusable = build_appendix(Path(sys.argv[1]), ["md", "tex"], jobs=int(sys.argv[2]))
assert not unusable and all(e.passed for e in entries) and contents
print(time.perf_counter() - start)
"""


def appendix_seconds(folder: Path, jobs: int) -> float:
    """The appendix (Markdown + LaTeX) of every case in ``folder``, as `closedform appendix`
    builds it, with ``jobs`` processes; in a fresh interpreter each time, so neither run
    inherits the other's warm caches."""
    output = subprocess.run([sys.executable, "-c", APPENDIX, str(folder), str(jobs)],
                            check=True, capture_output=True, text=True).stdout
    return float(output.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    arguments = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        figures = {}
        for n in (10, 100, 1000):
            figures[n] = measure(write_history(folder, n), compare=n == 1000)
            f = figures[n]
            print(f"N = {n:5d}: derive + verify {f['derive']:7.2f} s (with start-up "
                  f"{f['seconds']:.2f} s), peak memory {f['peak_mb']:.0f} MB, "
                  f"{f['pieces']} pieces, {f['status']}")
        growth = figures[1000]["seconds"] / figures[100]["seconds"]
        print(f"growth N=100 -> N=1000 (with start-up): x{growth:.1f}  (target <= 15)")
        difference = figures[1000]["difference"]
        print(f"N = 1000 against scipy solve_ivp (DOP853, rtol 1e-12), 3000 times: max difference "
              f"{difference:.1e} of the peak (target <= 1e-8)")
        met = figures[1000]["derive"] <= 10 and figures[1000]["peak_mb"] < 500 \
            and difference <= 1e-8
        print(f"N = 1000 target: derive + verify <= 10 s wall, < 500 MB, 1e-8: "
              f"{'met' if met else 'NOT met'} (with interpreter start-up and imports "
              f"{figures[1000]['seconds']:.1f} s)")
        if arguments.quick:
            return
        seconds, finished = generic_seconds(folder / "history-100.toml")
        ratio = seconds / figures[100]["derive"]
        print(f"generic sympy route, N = 100: {seconds:.1f} s{'' if finished else ' (stopped)'}; "
              f"closedform is {'' if finished else 'at least '}{ratio:.0f}x faster (target >= 10)")
        batch_folder = folder / "batch"
        batch_folder.mkdir()
        write_package(batch_folder)
        one = appendix_seconds(batch_folder, 1)
        cores = os.cpu_count() or 1
        many = appendix_seconds(batch_folder, cores)
        print(f"50-case batch (md + tex): 1 process {one:.1f} s, {cores} processes {many:.1f} s, "
              f"speed-up x{one / many:.2f} (target >= 1.6)")


if __name__ == "__main__":
    main()

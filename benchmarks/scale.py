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
import time
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
print(json.dumps({"seconds": done - start, "derive": done - loaded, "status": derivation.status,
                  "pieces": len(derivation.pieces),
                  "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
"""


def measure(case: Path) -> dict:
    output = subprocess.run([sys.executable, "-c", CHILD, str(case)], check=True,
                            capture_output=True, text=True).stdout
    return json.loads(output.strip().splitlines()[-1])


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


def appendix_seconds(folder: Path, jobs: int) -> float:
    import closedform.batch as batch

    paths = sorted(folder.glob("*.toml"))
    start = time.perf_counter()
    outcomes = batch.run_cases(paths, ["md", "tex"], time_budget=None, jobs=jobs, progress=False)
    assert all(o.exit_code == 0 for o in outcomes), [o.message for o in outcomes if o.exit_code]
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    arguments = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        figures = {}
        for n in (10, 100, 1000):
            figures[n] = measure(write_history(folder, n))
            f = figures[n]
            print(f"N = {n:5d}: derive + verify {f['derive']:7.2f} s (with start-up "
                  f"{f['seconds']:.2f} s), peak memory {f['peak_mb']:.0f} MB, "
                  f"{f['pieces']} pieces, {f['status']}")
        growth = figures[1000]["seconds"] / figures[100]["seconds"]
        print(f"growth N=100 -> N=1000 (with start-up): x{growth:.1f}  (target <= 15)")
        print(f"N = 1000 target: <= 10 s wall, < 500 MB: "
              f"{'met' if figures[1000]['seconds'] <= 10 and figures[1000]['peak_mb'] < 500 else 'NOT met'}")
        if arguments.quick:
            return
        seconds, finished = generic_seconds(folder / "history-100.toml")
        ratio = seconds / figures[100]["derive"]
        print(f"generic sympy route, N = 100: {seconds:.1f} s{'' if finished else ' (stopped)'}; "
              f"closedform is {'' if finished else 'at least '}{ratio:.0f}x faster (target >= 10)")
        batch_folder = folder / "batch"
        batch_folder.mkdir()
        worked = Path(__file__).resolve().parent.parent / "worked_cases"
        sources = [p for p in sorted(worked.glob("*.toml")) if "csv" not in p.read_text()]
        for i in range(50):
            source = sources[i % len(sources)]
            (batch_folder / f"{i:02d}-{source.name}").write_text(source.read_text())
        one = appendix_seconds(batch_folder, 1)
        cores = os.cpu_count() or 1
        many = appendix_seconds(batch_folder, cores)
        print(f"50-case batch (md + tex): 1 process {one:.1f} s, {cores} processes {many:.1f} s, "
              f"speed-up x{one / many:.2f} (target >= 1.6)")


if __name__ == "__main__":
    main()

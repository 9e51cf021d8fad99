"""The speed targets of issue 18, each as a ratio to a floor timed in the same run.

    python benchmarks/targets.py              # everything (the 10 000-segment case takes minutes)
    python benchmarks/targets.py --skip-long  # without the 10 000-segment case
    python benchmarks/targets.py --repeat 5   # best of 5 for the short runs (default 3)

The floor is ``python -c "import sympy, mpmath, numpy"``. Every run is a fresh process
started from the repository root (``python -m closedform …``), its wall time the best of
``--repeat`` runs (one run for the long history). Each run is paired with a run of the
floor just before it (a single run: before and after), and the ratio printed is the median
of the runs' ratios to their own floor: on a shared machine, whose speed drifts by tens of
per cent within minutes, a floor timed once at the start does not describe the later runs.
The CPU seconds (user + system, of every process the run started) are printed beside the
wall time: a long history's verification runs on a second core where there is one, so the
wall time of those runs is below their CPU time. Peak memory is the largest single
process's maximum resident set (resource.getrusage(RUSAGE_CHILDREN) in a wrapper process
that starts only that child); for the 10 000-point history, a separate run also samples the
proportional sets of all its processes together (a worker and its helper). Each line prints the seconds, the ratio to the floor and whether the target is met.
Nothing is asserted: targets are reported here, never as timed assertions in the tests.

closedform's bytecode is compiled first (``python -m compileall closedform``, into the
usual, git-ignored ``__pycache__`` folders), as ``pip install`` does for an installed copy
and as sympy, mpmath and numpy already are: where PYTHONDONTWRITEBYTECODE is set, every run
would otherwise compile closedform's sources afresh (about 0.05 s a run on the 2-core
machine), a cost no installed user pays and the floor does not carry.

The inputs are invented: a 4 000-sample synthetic support-acceleration record (seeded noise
under an envelope), and force histories of 1 000 segments and of 10 000 points (the most a table takes) (smooth swell + ripple
+ noise) on a damped spring-mass-damper.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import random
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from scale import write_history  # noqa: E402 - the same invented history as scale.py

ROOT = Path(__file__).resolve().parent.parent
PYTHON = sys.executable

WRAPPER = r"""
import json, resource, subprocess, sys, time
start = time.perf_counter()
done = subprocess.run(sys.argv[2:], cwd=sys.argv[1], stdout=subprocess.DEVNULL,
                      stderr=subprocess.PIPE)
wall = time.perf_counter() - start
usage = resource.getrusage(resource.RUSAGE_CHILDREN)
peak = usage.ru_maxrss / 1024
print(json.dumps({"wall": wall, "memory_mb": peak, "cpu": usage.ru_utime + usage.ru_stime,
                  "code": done.returncode,
                  "stderr": done.stderr.decode(errors="replace")[-300:]}))
"""


# The memory of all the processes of a run together (a worker and its helper share the
# pages the worker had when it forked the helper): the sum of their proportional sets (Pss),
# sampled 4 times a second, in a run of its own (reading every page table slows the run).
TREE_MEMORY = r"""
import json, subprocess, sys, time
sys.path.insert(0, sys.argv[1])
from closedform.workers import _SHARED_FIELDS, _children, _own   # the watchdog's own reading

def tree(pid):
    return [pid] + [p for child in _children(pid) for p in tree(child)]

process = subprocess.Popen(sys.argv[2:], cwd=sys.argv[1], stdout=subprocess.DEVNULL,
                           stderr=subprocess.DEVNULL)
peak = 0
while process.poll() is None:
    peak = max(peak, sum(_own(p, _SHARED_FIELDS) for p in tree(process.pid)))
    time.sleep(0.25)
print(json.dumps({"memory_mb": peak / 2 ** 20, "code": process.returncode}))
"""

FLOOR = [PYTHON, "-c", "import sympy, mpmath, numpy"]


def _run(command: list[str]) -> dict:
    out = subprocess.run([PYTHON, "-c", WRAPPER, str(ROOT), *command],
                         capture_output=True, text=True, check=True).stdout
    return json.loads(out)


def measure(command: list[str], repeat: int) -> dict:
    """Best wall time of ``repeat`` fresh runs, with the peak memory of that run; each run
    is paired with a run of the floor just before it (and, for a single run, just after),
    and ``ratio`` is the median of the runs' ratios to their own floor, so that the machine
    drifting between the runs (a shared machine does) cancels out of the ratio."""
    best = None
    ratios = []
    for _ in range(repeat):
        floor = _run(FLOOR)["wall"]
        result = _run(command)
        if repeat == 1:
            floor = (floor + _run(FLOOR)["wall"]) / 2
        ratios.append(result["wall"] / floor)
        if best is None or result["wall"] < best["wall"]:
            best = dict(result, floor=floor)
    assert best is not None
    best["ratio"] = statistics.median(ratios)
    return best


def write_record(folder: Path, samples: int = 4000, seed: int = 11) -> Path:
    rng = random.Random(seed)
    rows = ["# synthetic record for the benchmark (invented)", "time [s], acceleration [g0]"]
    for i in range(samples):
        t = i * 0.01
        envelope = math.sin(math.pi * i / (samples - 1)) ** 2
        rows.append(f"{t:.2f}, {0.3 * envelope * rng.gauss(0, 1):.6f}")
    path = folder / "record.csv"
    path.write_text("\n".join(rows) + "\n")
    return path


def report(name: str, result: dict, target: float, unit: str = "floor",
           reference: float | None = None, memory_target: float | None = None,
           expected_code: int = 0) -> None:
    ratio = result["ratio"] if reference is None else result["wall"] / reference
    met = ratio <= target and result["code"] == expected_code
    memory = ""
    if memory_target is not None:
        memory = f", memory {result['memory_mb']:.0f} MB (target ≤ {memory_target:g} MB)"
        met = met and result["memory_mb"] <= memory_target
    status = "MET" if met else "NOT MET"
    print(f"{name:<48} {result['wall']:7.2f} s (cpu {result['cpu']:6.2f} s)  {ratio:6.2f}× "
          f"{unit} (target ≤ {target:g}×){memory}  exit {result['code']}  {status}")
    if result["code"] != expected_code:
        print(f"    stderr: {result['stderr'].strip()}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--skip-long", action="store_true")
    arguments = parser.parse_args()
    repeat = arguments.repeat
    cli = ["-m", "closedform"]
    cores = os.cpu_count() or 1
    subprocess.run([PYTHON, "-m", "compileall", "-q", str(ROOT / "closedform")], check=True)
    with tempfile.TemporaryDirectory() as folder_name:
        folder = Path(folder_name)
        record = write_record(folder)
        history_1000 = write_history(folder, 1000)
        floor = min(_run(FLOOR)["wall"] for _ in range(repeat))
        label = 'floor: python -c "import sympy, mpmath, numpy"'
        print(f"{label:<48} {floor:7.2f} s (best of {repeat}; each ratio below is to "
              "the floor run next to it)")
        print(f"(cores: {cores})")
        for name, command in (("closedform --help", ["--help"]),
                              ("closedform --version", ["--version"]),
                              ("an input error (missing case file)",
                               ["derive", str(folder / "missing.toml")])):
            report(name, measure([PYTHON, *cli, *command], repeat), 0.3,
                   expected_code=2 if command[0] == "derive" else 0)
        report("record spectrum 4000 samples × 200 periods",
               measure([PYTHON, *cli, "spectrum", "--record", str(record), "--damping-ratio",
                        "0.05", "--periods", "0.02:5:200", "--json", "-"], repeat), 2)
        single = ROOT / "worked_cases" / "drop-hammer-skid.toml"
        report(f"derive+verify {single.name} --json -",
               measure([PYTHON, *cli, "derive", str(single), "--json", "-"], repeat), 2)
        report("derive+verify 1000-segment table --json -",
               measure([PYTHON, *cli, "derive", str(history_1000), "--json", "-"], repeat),
               4, memory_target=None)
        cases = sorted((ROOT / "worked_cases").glob("*.toml"))
        singles = 0.0
        for case in cases:
            singles += _run([PYTHON, *cli, "derive", str(case), "-o",
                             str(folder / "single" / case.stem), "--format", "md"])["wall"]
        appendix = _run([PYTHON, *cli, "appendix", str(ROOT / "worked_cases"), "-o",
                         str(folder / "appendix"), "--format", "md"])
        print(f"{'sum of single derive -o --format md (' + str(len(cases)) + ' cases)':<48} "
              f"{singles:7.2f} s; / {cores} cores = {singles / cores:.2f} s")
        report("appendix of all worked cases (md)", appendix, 1.3,
               unit="(sum of singles / cores)", reference=singles / cores)
        if not arguments.skip_long:
            # 10 000 points (the most a table takes): 9 999 segments between them
            history_10000 = write_history(folder, 9999)
            command = [PYTHON, *cli, "derive", str(history_10000), "--json", "-",
                       "--time-budget", "3600"]
            report("derive+verify 10 000-point table --json -", measure(command, 1), 30,
                   memory_target=400)
            together = json.loads(subprocess.run(
                [PYTHON, "-c", TREE_MEMORY, str(ROOT), *command],
                capture_output=True, text=True, check=True).stdout)
            print(f"{'  the same, all its processes together (Pss)':<48} "
                  f"{together['memory_mb']:.0f} MB (target ≤ 400 MB; a separate run sampled "
                  "4 times a second)")


if __name__ == "__main__":
    main()

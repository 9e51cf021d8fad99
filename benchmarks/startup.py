"""Start-up of the command line: `--help`, `--version` and an option error, against the floor.

Run from the repository root::

    python benchmarks/startup.py [--repeat 7]

Each command runs in a fresh interpreter (``python -m closedform …``), as an engineer types
it; the floor is ``python -c "import sympy, mpmath, numpy"``, timed in the same run and the
same way. The fastest of ``--repeat`` runs of each is reported, alternating the commands so
that a busy machine slows them alike. Target (issue 18): each ratio at most 0.3, i.e. none
of sympy, pint, numpy, mpmath or matplotlib is imported; the last column says which heavy
modules the command did import (``-X importtime``).
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("sympy", "pint", "numpy", "mpmath", "matplotlib")
TARGET = 0.3

COMMANDS = {
    "floor: import sympy, mpmath, numpy": ["-c", "import sympy, mpmath, numpy"],
    "closedform --help": ["-m", "closedform", "--help"],
    "closedform --version": ["-m", "closedform", "--version"],
    "closedform derive case.toml --jobs 0 (input error)":
        ["-m", "closedform", "derive", "case.toml", "--jobs", "0"],
    "closedform derive case.toml --format pdf (input error)":
        ["-m", "closedform", "derive", "case.toml", "--format", "pdf"],
}


def run_once(arguments: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run([sys.executable, *arguments], cwd=ROOT, capture_output=True, check=False)
    return time.perf_counter() - start


def heavy_imports(arguments: list[str]) -> list[str]:
    finished = subprocess.run([sys.executable, "-X", "importtime", *arguments], cwd=ROOT,
                              capture_output=True, text=True, check=False)
    found = set()
    for line in finished.stderr.splitlines():
        name = line.rsplit("|", 1)[-1].strip()
        if name in HEAVY:
            found.add(name)
    return sorted(found)


def main() -> int:
    options = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    options.add_argument("--repeat", type=int, default=7)
    repeat = options.parse_args().repeat
    best = {name: float("inf") for name in COMMANDS}
    for _ in range(repeat):
        for name, arguments in COMMANDS.items():
            best[name] = min(best[name], run_once(arguments))
    floor = best["floor: import sympy, mpmath, numpy"]
    print(f"{'command':58} {'best s':>8} {'ratio':>7}  heavy modules imported")
    worst = 0.0
    for name, arguments in COMMANDS.items():
        ratio = best[name] / floor
        heavy = "" if name.startswith("floor") else ", ".join(heavy_imports(arguments)) or "none"
        if not name.startswith("floor"):
            worst = max(worst, ratio)
        print(f"{name:58} {best[name]:8.3f} {ratio:7.2f}  {heavy}")
    print(f"largest ratio {worst:.2f} (target ≤ {TARGET})")
    return 0


if __name__ == "__main__":
    sys.exit(main())

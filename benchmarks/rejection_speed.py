"""How fast hostile input is refused and a single pulse is verified.

These were wall-clock assertions inside the test suite; timing belongs here, where a loaded
machine makes a slow run a figure to read rather than a failed test. Each figure is printed
as a ratio to a baseline measured in the same run (parsing a short, valid formula), so the
numbers mean the same on a fast and a slow machine.

Run from the repository root::

    python benchmarks/rejection_speed.py
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from closedform.errors import ExpressionError  # noqa: E402
from closedform.quantities import FORCE  # noqa: E402
from tests.test_expressions import hostile_corpus, parse  # noqa: E402
from tests.test_quantities import hostile_quantities, quantity  # noqa: E402
from tests.test_verify import derived  # noqa: E402


def best_of(function, repeat: int = 5) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return min(times)


def refused(function, text: str) -> None:
    try:
        function(text)
    except ExpressionError:
        return
    raise SystemExit(f"not refused: {text[:40]!r}")


def main() -> None:
    baseline = best_of(lambda: parse("2*k^2 + 3*k"))
    with tempfile.TemporaryDirectory() as folder:
        marker = Path(folder) / "marker"
        rows = [("power tower 9**9**9", lambda: refused(parse, "9**9**9"))]
        rows += [(f"formula {text[:30]!r}",
                  lambda text=text: refused(parse, text))
                 for text in hostile_corpus(marker)]
        rows += [(f"quantity {value[:30]!r}",
                  lambda value=value: refused(lambda s: quantity(s, FORCE), value))
                 for value in hostile_quantities(marker)]
        worst = max(((best_of(function, 3), name) for name, function in rows))
        print(f"baseline (parse a short formula): {baseline * 1e3:.2f} ms")
        print(f"slowest refusal of {len(rows)}: {worst[1]} {worst[0] * 1e3:.2f} ms "
              f"= {worst[0] / baseline:.1f}x baseline")
    derivation = derived("damped-half-sine")
    from closedform.checks.verification import verify
    seconds = best_of(lambda: verify(derivation), 3)
    print(f"verify one damped half-sine case: {seconds:.3f} s = {seconds / baseline:.0f}x baseline")


if __name__ == "__main__":
    main()

"""A time budget for the symbolic stages, so that no case can hang the tool.

The budget is one deadline for the whole derivation of a case; when it passes, the stage
running at that moment is named in the error. It uses the interval timer of the process
(SIGALRM), so it works in the main thread of the command line and of each batch worker;
elsewhere (a notebook's worker thread) it does nothing.
"""

from __future__ import annotations

import signal
import threading
from collections.abc import Iterator
from contextlib import contextmanager

from .errors import TimeBudgetExceeded

DEFAULT_SECONDS = 60.0


class Budget:
    """Tracks the stage being run; ``stage(name)`` marks where the time goes."""

    def __init__(self, seconds: float | None, case_name: str) -> None:
        self.seconds = seconds
        self.case_name = case_name
        self.current = "start"

    @contextmanager
    def stage(self, name: str) -> Iterator[None]:
        previous, self.current = self.current, name
        try:
            yield
        finally:
            self.current = previous


@contextmanager
def time_budget(seconds: float | None, case_name: str) -> Iterator[Budget]:
    budget = Budget(seconds, case_name)
    usable = (seconds is not None and seconds > 0 and hasattr(signal, "setitimer")
              and threading.current_thread() is threading.main_thread())
    if not usable:
        yield budget
        return

    def expire(_signum, _frame):
        raise TimeBudgetExceeded(f"{case_name}: the stage '{budget.current}' ran past the time "
                                 f"budget of {seconds:g} s (raise it with --time-budget)")

    previous_handler = signal.signal(signal.SIGALRM, expire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield budget
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous_handler)

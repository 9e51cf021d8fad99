"""A time budget for the symbolic stages, so that no case can hang the tool.

The budget is one deadline for the whole derivation of a case; when it passes, the stage
running at that moment is named in the error. It uses the interval timer of the process
(SIGALRM), so it works in the main thread of the command line and of each batch worker;
elsewhere (a notebook's worker thread) it does nothing.

The alarm interrupts the running stage with :class:`_Expired`, a ``BaseException``, so that
no ``except Exception`` inside the engine (a check that reports what went wrong, say) can
swallow it; the budget turns it into a :class:`~closedform.errors.TimeBudgetExceeded` where it
was set up. Until then the alarm repeats every second, in case some code swallows even that.

An alarm that lands in code whose exceptions Python only reports (a finaliser, a garbage
collector callback) would be printed as "Exception ignored in …" and lost; while a budget is
active, such reports of the alarm are silenced and the alarm is repeated at once instead.

Budgets nest: an inner budget (a derivation inside a batch task, say) never outlasts the one
around it, and the outer one is re-armed with what is left of its time when the inner ends.
A computation that stays inside one long call of compiled code cannot be interrupted before
that call returns.
"""

from __future__ import annotations

import math
import signal
import sys
import threading
import time
from collections.abc import Iterator
from contextlib import contextmanager

from .errors import TimeBudgetExceeded

DEFAULT_SECONDS = 60.0
#: Seconds between repeated alarms once a budget has run out and the stage has not yet stopped.
REPEAT_SECONDS = 1.0


class Budget:
    """Tracks the stage being run; ``stage(name)`` marks where the time goes."""

    def __init__(self, seconds: float | None, case_name: str,
                 deadline: float = math.inf) -> None:
        self.seconds = seconds
        self.case_name = case_name
        self.current = "start"
        self.deadline = deadline      # time.monotonic() at which the budget runs out
        self.armed = False
        self.stopped_in: str | None = None   # the stage the alarm interrupted

    @contextmanager
    def stage(self, name: str) -> Iterator[None]:
        previous, self.current = self.current, name
        try:
            yield
        finally:
            self.current = previous

    def message(self) -> str:
        seconds = self.seconds if self.seconds is not None else 0.0
        stage = self.stopped_in or self.current
        return (f"{self.case_name}: the stage '{stage}' ran past the time budget of "
                f"{seconds:g} s (raise it with --time-budget)")


class _Expired(BaseException):
    """Raised by the alarm inside the running stage; never seen outside this module."""


_active: list[Budget] = []


def _arm(seconds: float) -> None:
    signal.setitimer(signal.ITIMER_REAL, max(seconds, 1e-4))


def _on_alarm(_signum, _frame) -> None:
    if not _active or not _active[-1].armed:
        return
    budget = _active[-1]
    left = budget.deadline - time.monotonic()
    if left > 1e-3:          # an early alarm (an outer budget's, say): wait for the deadline
        _arm(left)
        return
    _arm(REPEAT_SECONDS)
    if budget.stopped_in is None:
        budget.stopped_in = budget.current
    raise _Expired


def _quiet_unraisable(previous):
    """An ``sys.unraisablehook`` that drops a lost alarm (and tries again) and passes
    everything else on to ``previous``."""
    def hook(unraisable) -> None:
        if unraisable.exc_type is _Expired:
            if _active and _active[-1].armed:
                _arm(0.01)
            return
        previous(unraisable)
    return hook


@contextmanager
def time_budget(seconds: float | None, case_name: str) -> Iterator[Budget]:
    """A deadline ``seconds`` from now (None: no limit of its own) for the code in the block;
    past it the running stage stops with TimeBudgetExceeded naming the stage and the case."""
    usable = (hasattr(signal, "setitimer")
              and threading.current_thread() is threading.main_thread())
    limited = seconds is not None and seconds > 0
    if not usable or not (limited or _active):
        yield Budget(seconds, case_name)
        return
    now = time.monotonic()
    deadline = now + seconds if seconds is not None and limited else math.inf
    outer = _active[-1] if _active else None
    if outer is not None and outer.deadline < deadline:
        deadline = outer.deadline
        seconds = outer.seconds
    budget = Budget(seconds, case_name, deadline)
    previous_handler = previous_hook = None
    if outer is None:
        previous_handler = signal.signal(signal.SIGALRM, _on_alarm)
        previous_hook = sys.unraisablehook
        sys.unraisablehook = _quiet_unraisable(previous_hook)
    else:
        outer.armed = False
    _active.append(budget)
    completed = False
    try:
        budget.armed = True
        if deadline != math.inf:
            _arm(deadline - now)
        yield budget
        completed = True
    except _Expired:
        budget.armed = False
        raise TimeBudgetExceeded(budget.message()) from None
    finally:
        budget.armed = False
        _active.remove(budget)
        if outer is None:
            signal.setitimer(signal.ITIMER_REAL, 0)
            signal.signal(signal.SIGALRM, previous_handler)
            if previous_hook is not None:
                sys.unraisablehook = previous_hook
        else:
            signal.setitimer(signal.ITIMER_REAL, 0)
            left = outer.deadline - time.monotonic()
            if outer.deadline != math.inf and (left > 0 or completed):
                # The outer budget goes on; if it ran out just as the inner block completed,
                # it is interrupted at once. If the inner block is failing, the outer one
                # only needs interrupting when it still has time of its own (else the error
                # on its way out says all there is to say).
                outer.armed = True
                _arm(left)
            elif outer.deadline == math.inf:
                outer.armed = True

"""The mpmath context every public entry point runs in, whatever the caller's holds.

mpmath keeps its working precision in one process-wide context. A notebook that has set
``mpmath.mp.dps = 8`` (or 50) must get the same derivation, the same checks and the same
sheet as the command line: each entry point below re-enters mpmath's default precision,
and the stages then raise it explicitly (``workdps``) wherever they need more digits.
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from typing import TypeVar

BASE_DIGITS = 15          # mpmath's own default: what the stages were written against

F = TypeVar("F", bound=Callable)


def own_precision(function: F) -> F:
    """``function`` run at BASE_DIGITS digits, the caller's mpmath context restored after."""
    @functools.wraps(function)
    def at_base_digits(*arguments, **options):
        import mpmath  # here: importing a decorated module stays light

        with mpmath.workdps(BASE_DIGITS):
            return function(*arguments, **options)
    return at_base_digits  # type: ignore[return-value]

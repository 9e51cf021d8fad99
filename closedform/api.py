"""Python use: the response at chosen times, many cases at once, a summary for notebooks.

``evaluate`` reads the closed-form pieces of a derivation at any array of times: each time
falls in one interval [start, next start) (the last interval includes the end of the
window) and the piece there is evaluated in its local time. In float64 the terms
u^k·e^(σu)·cos|sin(ωu) are vectorised over the times; pieces that the engine carries in
30-digit arithmetic (long load histories) are evaluated point by point at that precision
and rounded to float64 at the end. The other responses of a model (velocity, spring force,
support reaction, current, …) are the same linear maps of the response that the results
stage uses for their peaks, named as in the JSON result without the ``peak_`` prefix.
"""

from __future__ import annotations

import base64
import html
import operator
from collections.abc import Callable, Iterable
from multiprocessing.reduction import ForkingPickler
from pathlib import Path
from types import MappingProxyType
from typing import TYPE_CHECKING, Any

from .precision import own_precision

if TYPE_CHECKING:
    from .derivation import Derivation

LOAD = "load"


def response_transforms(derivation: Derivation) -> dict[str, Callable | None]:
    """The responses ``evaluate`` can give, by name, each mapping the numeric response on
    one interval to that quantity (None where a symbol without a value is needed).

    The names are the JSON peak names without ``peak_`` (``velocity``, ``spring_force``,
    ``support_reaction``, ``current``, …), the response variable itself (``x`` and
    ``response``) and ``load``, the load history.
    """
    from .results import quantity_definitions

    variable = derivation.model.variable
    transforms: dict[str, Callable | None] = {"response": _identity, variable: _identity}
    for name, _text, _unit, transform in quantity_definitions(derivation.case, derivation.model):
        transforms[name.removeprefix("peak_")] = transform
    transforms[LOAD] = _identity
    if getattr(derivation, "plastic", None) is not None:
        # a yielding spring's force is R(x) of each phase, not one transform of x: these
        # are reported as peaks (JSON) but not offered here
        for name in ("spring_force", "support_reaction", "absolute_acceleration"):
            transforms.pop(name, None)
    return transforms


def _identity(function):
    return function


@own_precision
def evaluate(derivation: Derivation, times, derivative: int = 0, response: str | None = None,
             precise: bool | None = None):
    """The response (or one of its derivatives, or another response) at ``times``, SI.

    See ``Derivation.evaluate`` for the parameters.
    """
    import mpmath
    import numpy

    from .response import load_pieces
    from .results import DIGITS, FloatEvaluator, PreciseEvaluator, numeric_intervals, piece_functions

    try:
        order = -1 if isinstance(derivative, bool) else operator.index(derivative)
    except TypeError:
        order = -1
    if order < 0:
        raise ValueError(f"derivative must be a whole number 0, 1, 2, … (got {derivative!r})")
    if response is not None and not isinstance(response, str):
        raise ValueError(f"response must be a name such as 'velocity' (got {response!r})")
    case = derivation.case
    if not case.is_fully_valued:
        missing = ", ".join(d.name for d in case.symbols if d.value is None)
        raise ValueError(f"the response is symbolic in {missing}; give every symbol a value "
                         "to evaluate it")
    transforms = response_transforms(derivation)
    name = response or "response"
    if name.startswith("peak_") and name.removeprefix("peak_") in transforms:
        name = name.removeprefix("peak_")
    if name not in transforms:
        raise ValueError(f"unknown response {name!r} (expected one of "
                         f"{', '.join(sorted(transforms))})")
    transform = transforms[name]
    if transform is None:
        raise ValueError(f"the response {name!r} needs values for the model's symbols")

    points = numpy.asarray(times, dtype=float)
    values = case.symbol_values()
    pieces = derivation.pieces
    starts = [piece.start for piece in pieces]
    if name == LOAD:
        functions = load_pieces(derivation.history, starts, exact=derivation.solution.exact)
    else:
        functions = piece_functions(pieces)
    intervals = numeric_intervals(functions, starts, derivation.window.until, values)
    until = float(intervals[-1].end)
    flat = points.ravel()
    if not numpy.all(numpy.isfinite(flat)):
        raise ValueError("times must be finite numbers of seconds")
    if flat.size and (flat.min() < 0 or flat.max() > until * (1 + 1e-12)):
        raise ValueError(f"times must lie in the analysis window [0, {until:.6g}] s (got "
                         f"{flat.min():.6g} … {flat.max():.6g} s)")
    bounds = numpy.array([float(i.start) for i in intervals])
    which = numpy.clip(numpy.searchsorted(bounds, flat, side="right") - 1, 0, len(intervals) - 1)
    if precise is None:
        precise = any(piece.numeric is not None for piece in pieces)
    result = numpy.zeros(flat.shape, dtype=float)
    for index in numpy.unique(which):
        interval = intervals[index]
        chosen = which == index
        function = transform(interval.function)
        if precise:
            at_30_digits = PreciseEvaluator(function, orders=order + 1)
            with mpmath.workdps(DIGITS + 10):
                result[chosen] = [float(at_30_digits(mpmath.mpf(float(t)) - interval.start)[order])
                                  for t in flat[chosen]]
        else:
            in_floats = FloatEvaluator(function, orders=order + 1)
            result[chosen] = in_floats(flat[chosen] - float(interval.start))[order]
    return result.reshape(points.shape)


# ----------------------------------------------------------------------------- loading


def load_case(source, *, name: str | None = None):
    r"""Read and check a case: from a file, from TOML text or from a dict.

    Parameters
    ----------
    source : str, pathlib.Path or Mapping
        A ``Path`` is a case file. A ``str`` is a case file when a file of that name
        exists, else TOML text when it holds a line break or an ``=``, else a file name
        (that cannot be read). A mapping is the TOML structure itself (tables as dicts,
        arrays of tables as lists of dicts), so cases can be built in a loop.
    name : str, optional
        The name errors show for the case (default: the path, ``"<string>"`` for text,
        ``"<dict>"`` for a mapping).

    Returns
    -------
    Case
        The validated case.

    Raises
    ------
    CaseError
        Bad input, located as on the command line: ``FILE:LINE: KEY: what is wrong``.

    Examples
    --------
    >>> case = load_case({"title": "Sensor lag", "load": [{"shape": "step", "amplitude": 1}],
    ...                   "system": {"model": "first-order", "time_constant": "40 ms"}})
    >>> case.system.model
    'first-order'
    >>> load_case('title = "Sensor lag"\n[system]\nmodel = "first-order"\n'
    ...           'time_constant = "-1 s"\n')
    Traceback (most recent call last):
    ...
    closedform.errors.CaseError: <string>:4: system.time_constant: must be positive (expected a positive value, got -1 s)
    """
    from .case import load_case as read

    if isinstance(source, str) and _is_toml_text(source):
        return read("", text=source, name=name)
    return read(source, name=name)


def _is_toml_text(source: str) -> bool:
    if "\n" not in source and "=" not in source:
        return False
    try:
        return not Path(source).is_file()
    except (OSError, ValueError):     # too long or holding a NUL: not a file name
        return True


# ----------------------------------------------------------------------------- many cases


def _read_only(items: dict) -> MappingProxyType:
    return MappingProxyType(items)


# Cases and derivations hold read-only mappings (MappingProxyType), which pickle cannot
# send as they are. Registered with multiprocessing's own pickler only (not copyreg), so
# the process pool can send cases out and derivations back and nothing else changes.
ForkingPickler.register(MappingProxyType, lambda mapping: (_read_only, (dict(mapping),)))


def derive_case(case) -> Any:
    """``derive(case)`` as a top-level function, so a process pool can send it."""
    from .derivation import derive

    return derive(case)


def derive_many(cases: Iterable, *, jobs: int | None = None, progress: bool | None = None) -> list:
    """Derive several cases in a process pool, with a progress bar on standard error.

    Parameters
    ----------
    cases : iterable of Case, path, TOML text or dict
        Each is read with ``load_case`` first (all of them before any is derived, so a bad
        one raises CaseError before work starts).
    jobs : int, optional
        Processes to use (default: every core; 1 derives in this process).
    progress : bool, optional
        Show the progress bar (default: when standard error is a terminal).

    Returns
    -------
    list of Derivation
        In the order of ``cases``.

    Examples
    --------
    >>> text = '''
    ... title = "Sensor lag"
    ... [system]
    ... model = "first-order"
    ... time_constant = "2 s"
    ... [[load]]
    ... shape = "step"
    ... amplitude = 1
    ... '''
    >>> [d.status for d in derive_many([text, text], jobs=1)]
    ['verified', 'verified']
    """
    import sys

    from .batch import TerminalProgress, map_cases
    from .case import Case

    loaded = [case if isinstance(case, Case) else load_case(case) for case in cases]
    show = sys.stderr.isatty() if progress is None else progress
    return map_cases(derive_case, [(case,) for case in loaded],
                     [case.source for case in loaded], jobs=jobs,
                     progress=TerminalProgress(sys.stderr) if show else None)


# ----------------------------------------------------------------------------- notebook


def sheet_markdown(derivation: Derivation) -> str:
    """The Markdown sheet with its two figures embedded (SVG data URIs), for a notebook,
    where no figure files sit beside it."""
    from .render import figure_files, render_markdown

    stem = Path(derivation.case.source).stem or "case"
    text = render_markdown(derivation, stem=stem)
    for name, data in figure_files(derivation, stem, "svg").items():
        uri = "data:image/svg+xml;base64," + base64.b64encode(data).decode("ascii")
        text = text.replace(f"]({name})", f"]({uri})")
    return text


def summary_html(derivation: Derivation) -> str:
    """A short HTML table for notebooks: status first, then the title, the model and the
    main results. Every string is escaped (titles come from other people's files)."""
    numbers = derivation.numbers
    case = derivation.case
    from . import quantities

    unit = quantities.si_unit_text(case.system.response_dimension)
    rows: list[tuple[str, str]] = [("status", derivation.status.upper())]
    if derivation.status != "verified":
        failed = [c.name for c in derivation.checks if c.outcome == "failed"]
        inconclusive = [c.name for c in derivation.checks if c.outcome == "inconclusive"]
        rows.append(("failed checks", ", ".join(failed) or ("none" if inconclusive else "none run")))
        if inconclusive:
            rows.append(("inconclusive checks", ", ".join(inconclusive)))
    rows += [("title", case.title), *([("reference", case.reference)] if case.reference else []),
             ("model", f"{case.system.model} ({derivation.model.regime})"),
             ("pieces", str(len(derivation.pieces)))]
    if numbers.peak is not None:
        rows.append(("peak", f"{numbers.peak.value:.6g} {unit} at t = {numbers.peak.time:.6g} s"))
    if numbers.static is not None:
        rows.append(("static response", f"{numbers.static:.6g} {unit}"))
    if numbers.dlf is not None:
        rows.append(("dynamic load factor", f"{numbers.dlf:.4g}"))
    for quantity in numbers.quantities:
        if quantity.extreme is not None:
            rows.append((quantity.name, f"{quantity.extreme.value:.6g} {quantity.unit} at "
                                        f"t = {quantity.extreme.time:.6g} s"))
    for warning in derivation.warnings:
        rows.append(("warning", warning))
    colour = "#1b7837" if derivation.passed else "#b2182b"
    body = "".join(
        f"<tr><th style=\"text-align:left\">{html.escape(key)}</th>"
        f"<td style=\"text-align:left\">{html.escape(value)}</td></tr>"
        for key, value in rows[1:])
    status = html.escape(rows[0][1])
    return (f"<table><tr><th style=\"text-align:left\">status</th><td style=\"text-align:left;"
            f"color:{colour};font-weight:bold\">{status}</td></tr>{body}</table>")


"""The ``spectrum`` command: shock spectra of single pulses (the closed form, shock.py, each
point checked by spectrum_check.py) and response spectra of support-acceleration records
(records.py).

This module is imported whenever the command line is built, so it imports nothing heavy at
module level: the engines are imported when a spectrum is computed. The names of shock.py
(Pulse, response_spectrum, …) are reachable from here as before.
"""

from __future__ import annotations

import argparse
import math
import sys
from collections.abc import Callable
from fractions import Fraction
from pathlib import Path
from typing import Any

from .budget import DEFAULT_SECONDS, time_budget
from .errors import CaseError

SHAPES = ("rectangle", "triangle", "decay", "half-sine", "trapezoid")
RANGE_LIMIT = 100_000                           # points of one --range, at most


def __getattr__(name: str):
    from . import shock
    try:
        return getattr(shock, name)
    except AttributeError:
        raise AttributeError(f"module 'closedform.spectrum' has no attribute {name!r}") from None


# ----------------------------------------------------------------------------- command line


def register(commands) -> None:
    parser = commands.add_parser(
        "spectrum", help="peak response of a single pulse against t_d/T_n (shock spectrum)",
        description="Shock spectrum of a pulse on a damped single-degree-of-freedom "
                    "oscillator, from the closed form: DLF, time of peak and residual "
                    "amplitude against the ratio of pulse duration to natural period.")
    parser.add_argument("--shape", help=f"pulse shape: {', '.join(SHAPES)}")
    parser.add_argument("--record", type=Path, metavar="FILE.csv",
                        help="response spectrum of a support-acceleration record instead: two "
                             "columns time, acceleration (units in the header, else SI)")
    parser.add_argument("--periods", metavar="A:B:N|A,B,…",
                        help="with --record: N log-spaced periods from A to B seconds, or a "
                             "comma-separated list")
    parser.add_argument("--peak-at", metavar="F", help="triangle: time of the peak as a fraction "
                        "of the duration (default 0.5)")
    parser.add_argument("--rise", metavar="F", help="trapezoid: rise as a fraction of the duration")
    parser.add_argument("--hold", metavar="F", help="trapezoid: hold as a fraction of the duration")
    parser.add_argument("--fall", metavar="F", help="trapezoid: fall as a fraction of the duration")
    parser.add_argument("--damping-ratio", metavar="Z", default="0",
                        help="damping ratio ζ, 0 ≤ ζ < 1 (default 0)")
    parser.add_argument("--ratios", metavar="A,B,…", help="t_d/T_n values, comma-separated")
    parser.add_argument("--range", dest="ratio_range", metavar="LO:HI:N",
                        help="N evenly spaced t_d/T_n values from LO to HI")
    parser.add_argument("--strength-ratios", metavar="A,B,…",
                        help="ductility spectrum of an elastic-plastic oscillator instead: one "
                             "curve per yield resistance over peak load R_m/F_1")
    parser.add_argument("--json", dest="json_target", metavar="-",
                        help="print the JSON result on standard output ('-')")
    parser.add_argument("-o", "--output", type=Path, metavar="DIR",
                        help="folder for the CSV, the plot (SVG and PNG) and the JSON")
    parser.add_argument("--time-budget", type=float, default=DEFAULT_SECONDS, metavar="SECONDS",
                        help=f"stop a spectrum that runs longer (default {DEFAULT_SECONDS:g})")
    parser.set_defaults(run=run_spectrum)


def _exact_number(text: str, option: str, what: str) -> Fraction:
    try:
        return Fraction(text.strip())
    except (ValueError, ZeroDivisionError):
        raise CaseError(f"'{text}' is not a number (expected {what})", file=option)


def _fraction(text: str, option: str, what: str):
    import sympy

    value = _exact_number(text, option, what)
    return sympy.Rational(value.numerator, value.denominator)


def parse_ratios(text: str) -> list:
    items = [item for item in text.split(",")]
    if not text.strip() or any(not item.strip() for item in items):
        raise CaseError(f"expected comma-separated positive numbers, got '{text}'", file="--ratios")
    ratios = [_fraction(item, "--ratios", "a positive t_d/T_n") for item in items]
    for item, ratio in zip(items, ratios):
        if ratio <= 0:
            raise CaseError(f"ratios must be positive, got {item.strip()}", file="--ratios")
        _in_range(ratio, item.strip(), "--ratios")
    return ratios


def _in_range(ratio, text: str, option: str) -> None:
    from .checks.spectrum_check import RATIO_RANGE

    low, high = RATIO_RANGE
    if not low <= ratio <= high:
        raise CaseError(f"t_d/T_n must be from {low:g} to {high:g} (the range in which each "
                        f"point is computed and checked), got {text}", file=option)


def parse_range(text: str) -> list:
    parts = text.split(":")
    if len(parts) != 3:
        raise CaseError(f"expected LO:HI:N, got '{text}'", file="--range")
    low = _fraction(parts[0], "--range", "LO, a positive t_d/T_n")
    high = _fraction(parts[1], "--range", "HI, a positive t_d/T_n")
    try:
        count = int(parts[2].strip())
    except ValueError:
        raise CaseError(f"N must be a whole number, got '{parts[2].strip()}'", file="--range")
    if low <= 0:
        raise CaseError(f"LO must be positive, got {parts[0].strip()}", file="--range")
    _in_range(low, parts[0].strip(), "--range")
    _in_range(high, parts[1].strip(), "--range")
    if high < low:
        raise CaseError(f"HI must not be below LO, got {parts[1].strip()} < {parts[0].strip()}",
                        file="--range")
    if not 1 <= count <= RANGE_LIMIT:
        raise CaseError(f"N must be from 1 to {RANGE_LIMIT}, got {count}", file="--range")
    if count == 1:
        if high != low:
            raise CaseError("N = 1 needs LO = HI", file="--range")
        return [low]
    return [low + (high - low) * i / (count - 1) for i in range(count)]


def parse_pulse(arguments: argparse.Namespace):
    import sympy

    from .shock import Pulse

    shape = arguments.shape
    if shape is None:
        raise CaseError(f"missing (expected one of: {', '.join(SHAPES)})", file="--shape")
    if shape not in SHAPES:
        raise CaseError(f"unknown shape '{shape}' (expected one of: {', '.join(SHAPES)})",
                        file="--shape")
    if arguments.peak_at is not None and shape != "triangle":
        raise CaseError(f"only a triangle has a peak position (the shape is {shape})",
                        file="--peak-at")
    trapezoid = {name: getattr(arguments, name) for name in ("rise", "hold", "fall")}
    for name, value in trapezoid.items():
        if value is not None and shape != "trapezoid":
            raise CaseError(f"only a trapezoid has rise, hold and fall (the shape is {shape})",
                            file=f"--{name}")
    if shape == "triangle":
        peak_at = sympy.Rational(1, 2)
        if arguments.peak_at is not None:
            peak_at = _fraction(arguments.peak_at, "--peak-at", "a fraction from 0 to 1")
            if not 0 <= peak_at <= 1:
                raise CaseError(f"must lie from 0 to 1 (a fraction of the duration), got "
                                f"{arguments.peak_at}", file="--peak-at")
        return Pulse(shape, peak_at=peak_at)
    if shape == "trapezoid":
        parts = {}
        for name, value in trapezoid.items():
            if value is None:
                raise CaseError("missing (a trapezoid needs --rise, --hold and --fall, fractions "
                                "of the duration summing to 1)", file=f"--{name}")
            parts[name] = _fraction(value, f"--{name}", "a fraction of the duration")
            if parts[name] < 0:
                raise CaseError(f"must not be negative, got {value}", file=f"--{name}")
        if sum(parts.values()) != 1:
            raise CaseError(f"--rise, --hold and --fall must sum to 1 (fractions of the "
                            f"duration), got {float(sum(parts.values())):g}", file="--fall")
        return Pulse(shape, **parts)
    return Pulse(shape)


def run_spectrum(arguments: argparse.Namespace) -> int:
    if arguments.record is not None:     # float64 alone: neither sympy nor the pulse route
        return run_record_spectrum(arguments)
    from .cli import usable_output_folder
    from .shock import response_spectrum, spectrum_figure

    if arguments.periods is not None:
        raise CaseError("periods are for a record spectrum (give --record FILE.csv); a pulse "
                        "spectrum takes --ratios or --range", file="--periods")
    pulse = parse_pulse(arguments)
    zeta = _fraction(arguments.damping_ratio, "--damping-ratio", "a damping ratio from 0 to below 1")
    if not 0 <= zeta < 1:
        raise CaseError(f"must be at least 0 and below 1 (spectra are for oscillating systems), "
                        f"got {arguments.damping_ratio}", file="--damping-ratio")
    if (arguments.ratios is None) == (arguments.ratio_range is None):
        raise CaseError("give exactly one of --ratios and --range", file="--ratios")
    ratios = parse_ratios(arguments.ratios) if arguments.ratios is not None \
        else parse_range(arguments.ratio_range)
    if arguments.json_target not in (None, "-"):
        raise CaseError(f"expected '-' (standard output), got '{arguments.json_target}'",
                        file="--json")
    if arguments.output is not None:
        usable_output_folder(arguments.output)
    if arguments.time_budget is not None and not 0 < arguments.time_budget < math.inf:
        raise CaseError("must be a positive number of seconds", file="--time-budget")
    if getattr(arguments, "strength_ratios", None) is not None:
        from .ductility_spectrum import run_ductility_spectrum  # a yielding oscillator
        return run_ductility_spectrum(arguments, pulse, zeta, ratios)
    with time_budget(arguments.time_budget, "spectrum") as budget:
        spectrum = response_spectrum(pulse, zeta, ratios, budget)
    return emit_spectrum(arguments, spectrum, f"spectrum-{pulse.shape}", spectrum_figure)


def emit_spectrum(arguments: argparse.Namespace, spectrum: Any, stem: str,
                  figure: Callable[[Any, str], bytes]) -> int:
    """A computed spectrum out as the options ask: JSON on standard output (``--json -``),
    STEM.csv/.json/.svg/.png in ``-o``, else CSV on standard output; exit 1 (each failed
    point named on standard error) unless every point is verified."""
    from .cli import write_atomically

    if arguments.json_target == "-":
        sys.stdout.write(spectrum.to_json() + "\n")
    if arguments.output is not None:
        write_atomically(arguments.output, {
            f"{stem}.csv": spectrum.to_csv(),
            f"{stem}.json": spectrum.to_json() + "\n",
            f"{stem}.svg": figure(spectrum, "svg"),
            f"{stem}.png": figure(spectrum, "png"),
        })
    if arguments.json_target is None and arguments.output is None:
        sys.stdout.write(spectrum.to_csv())
    if spectrum.status != "verified":
        for line in spectrum.failures():
            print(f"FAILED: {line}", file=sys.stderr)
        return 1
    return 0


def run_record_spectrum(arguments: argparse.Namespace) -> int:
    """``spectrum --record FILE.csv --periods …``: see records.py."""
    from .cli import usable_output_folder, write_atomically
    from .records import parse_periods, read_record, record_spectrum, record_spectrum_figure

    for option, value in (("--shape", arguments.shape), ("--ratios", arguments.ratios),
                          ("--range", arguments.ratio_range), ("--peak-at", arguments.peak_at),
                          ("--rise", arguments.rise), ("--hold", arguments.hold),
                          ("--fall", arguments.fall)):
        if value is not None:
            raise CaseError("is for a pulse spectrum, not with --record", file=option)
    if arguments.periods is None:
        raise CaseError("missing (a record spectrum needs --periods START:STOP:COUNT or a "
                        "list A,B,…, in seconds)", file="--periods")
    zeta = _exact_number(arguments.damping_ratio, "--damping-ratio",
                         "a damping ratio from 0 to below 1")
    if not 0 <= zeta < 1:
        raise CaseError(f"must be at least 0 and below 1 (spectra are for oscillating systems), "
                        f"got {arguments.damping_ratio}", file="--damping-ratio")
    periods = parse_periods(arguments.periods)
    if arguments.json_target not in (None, "-"):
        raise CaseError(f"expected '-' (standard output), got '{arguments.json_target}'",
                        file="--json")
    if arguments.time_budget is not None and not 0 < arguments.time_budget < math.inf:
        raise CaseError("must be a positive number of seconds", file="--time-budget")
    if arguments.output is not None:
        usable_output_folder(arguments.output)
    record = read_record(arguments.record)
    with time_budget(arguments.time_budget, "record spectrum") as budget:
        spectrum = record_spectrum(record, float(zeta), periods, budget)
    if arguments.json_target == "-":
        sys.stdout.write(spectrum.to_json() + "\n")
    if arguments.output is not None:
        write_atomically(arguments.output, {
            "record-spectrum.csv": spectrum.to_csv(),
            "record-spectrum.json": spectrum.to_json() + "\n",
            "record-spectrum.svg": record_spectrum_figure(spectrum, "svg"),
            "record-spectrum.png": record_spectrum_figure(spectrum, "png"),
        })
    if arguments.json_target is None and arguments.output is None:
        sys.stdout.write(spectrum.to_csv())
    if spectrum.status != "verified":
        for check in spectrum.checks:
            if not check.passed:
                print(f"FAILED: {check.name}: {check.detail}", file=sys.stderr)
        return 1
    return 0

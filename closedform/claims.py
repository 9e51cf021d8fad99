"""Reading the [claims] of a case: what someone else's calculation asserts, in exact SI.

A claim is read only after our own derivation exists, because the names that can be
claimed are the scalar results the JSON result carries (``peak``, ``peak_time``, ``dlf``,
``static``, ``peak_velocity``, ``residual`` …): :func:`claimable_results` finds them in the
result dictionary itself, so a result added to the JSON later is claimable without any
change here. Besides those names a case may claim

* ``response = [{ from, to, expr, expr_unit, time_unit }, …]``: formulas in t, each on its
  own interval (``to`` omitted: to the end of the window); ``expr_unit``/``time_unit`` say
  that the formula gives the response in that unit for t in that unit (converted exactly);
* ``at = [{ time, value }, …]``: values of the response at given times;
* ``tolerance``: a relative number in (0, 1), a percentage such as ``"5 %"``, or a table
  ``{ numbers = …, expressions = … }`` of those.

Every problem is a CaseError naming the key (``claims.response[2].expr``); the command line
adds the file and the line (:func:`locate_claim`), like every other input error.
"""

from __future__ import annotations

import difflib
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import sympy

from . import quantities
from .basis import COS, SIN, BasisTerm, ExponentialPolynomial
from .errors import CaseError
from .expressions import parse_expression, parse_number, quote

NUMBER_TOLERANCE = sympy.Rational(5, 1000)      # 0.5 % for reported numbers
EXPRESSION_TOLERANCE = sympy.Rational(1, 10**6)  # 1e-6 relative for expressions
#: Keys of [claims] that are not result names.
SPECIAL_KEYS = ("response", "at", "tolerance")
#: Keys of the JSON result that describe the case or the run, not a result of it.
NOT_RESULTS = frozenset({"schema", "title", "reference", "tool_version", "status", "model",
                         "variable", "regime", "until", "pieces", "warnings", "checks",
                         "claims"})
_PERCENT_RE = re.compile(r"[ \t]*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)[ \t]*%[ \t]*")
_TIME_FIELDS = ("time", "after", "start", "end")
#: Dimensions of the numbers of a nested result table (``equivalent`` of a member, whose
#: ranges are tables of factors): claimed as ``name_table_field``, ``-`` read as ``_``.
_FIELD_DIMENSIONS = {"load_factor": "dimensionless", "mass_factor": "dimensionless",
                     "load_mass_factor": "dimensionless", "stiffness": "stiffness",
                     "resistance": "force", "mass": "mass", "beam_mass": "mass",
                     "reference_point": "length"}

Error = Callable[[str, str], CaseError]


# ----------------------------------------------------------------------------- tolerance


@dataclass(frozen=True)
class Tolerances:
    """Relative tolerances: for reported numbers and for claimed formulas."""

    numbers: sympy.Rational = NUMBER_TOLERANCE
    expressions: sympy.Rational = EXPRESSION_TOLERANCE


def relative_tolerance(value: Any, key: str, error: Error) -> sympy.Rational:
    """A relative tolerance: a number strictly between 0 and 1, or a percentage string.

    >>> relative_tolerance("5 %", "claims.tolerance", CaseError)
    1/20
    """
    expected = ('expected a relative tolerance between 0 and 1 (such as 0.005) or a '
                'percentage such as "0.5 %"')
    if isinstance(value, str):
        match = _PERCENT_RE.fullmatch(value)
        if match is None:
            raise error(key, f"{expected}, got {quote(value)}")
        number = parse_number(match.group(1), key=key) / 100
    elif isinstance(value, (int, float)) and not isinstance(value, bool):
        if isinstance(value, float) and value != value:
            raise error(key, f"{expected}, got nan")
        number = sympy.Rational(repr(value)) if isinstance(value, float) else sympy.Integer(value)
    else:
        shown = str(value).lower() if isinstance(value, bool) else type(value).__name__
        raise error(key, f"{expected}, got {shown}")
    if not 0 < number < 1:
        shown = value if isinstance(value, str) else repr(value)
        hint = f" (did you mean \"{value} %\"?)" if not isinstance(value, str) and 1 <= number < 100 else ""
        raise error(key, f"{expected}, got {quote(shown) if isinstance(value, str) else shown}"
                         f"{hint}")
    return number


def read_tolerances(claims: Mapping[str, Any], error: Error) -> Tolerances:
    tolerance = claims.get("tolerance")
    if tolerance is None:
        return Tolerances()
    if isinstance(tolerance, Mapping):
        unknown = sorted(set(tolerance) - {"numbers", "expressions"})
        if unknown:
            raise error(f"claims.tolerance.{unknown[0]}",
                        "unknown key (expected numbers, expressions)")
        numbers, expressions = NUMBER_TOLERANCE, EXPRESSION_TOLERANCE
        if "numbers" in tolerance:
            numbers = relative_tolerance(tolerance["numbers"], "claims.tolerance.numbers", error)
        if "expressions" in tolerance:
            expressions = relative_tolerance(tolerance["expressions"],
                                             "claims.tolerance.expressions", error)
        return Tolerances(numbers, expressions)
    value = relative_tolerance(tolerance, "claims.tolerance", error)
    return Tolerances(value, value)


# ----------------------------------------------------------------------------- result names


@dataclass(frozen=True)
class Claimable:
    """One scalar of the JSON result that a claim may name: its SI value (None where the
    case does not define it) and dimension (None where the JSON does not say)."""

    name: str
    value: float | None
    dimension: Any
    magnitude: bool = False      # compare magnitudes (a signed extreme)
    note: str = ""


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def claimable_results(result: Mapping[str, Any], response_dimension) -> dict[str, Claimable]:
    """Every scalar the JSON ``result`` carries, by its claim name.

    A top-level number is claimed by its key (``dlf``, ``static``); a table with a
    ``value`` (an extreme: ``peak``, ``peak_velocity`` …) or an ``amplitude`` (``residual``)
    by its key, and its other numbers by ``key_field`` (``peak_time``, ``residual_after``).
    The dimension comes from the table's ``unit``, from the response's dimension for
    ``peak`` and ``static``, or is time for the time fields.
    """
    time = quantities.dimension("time")
    core = {"peak": response_dimension, "static": response_dimension,
            "dlf": quantities.DIMENSIONLESS}
    found: dict[str, Claimable] = {}

    def dimension_for(name: str, unit: Any) -> Any:
        if name in core:
            return core[name]
        if isinstance(unit, str):
            try:
                return quantities.dimension_of_unit(unit, key=None)
            except CaseError:
                return None
        return time if name.endswith("_time") else None

    for name, value in result.items():
        if name in NOT_RESULTS or not isinstance(name, str):
            continue
        if value is None or _is_number(value):
            found[name] = Claimable(name, None if value is None else float(value),
                                    dimension_for(name, None))
        elif isinstance(value, Mapping):
            main = "value" if "value" in value else "amplitude" if "amplitude" in value else None
            extreme = main == "value" and "time" in value
            for part, number in value.items():
                if isinstance(number, Mapping):
                    _nested(found, f"{name}_{part}".replace("-", "_"), number)
                    continue
                if not (number is None or _is_number(number)):
                    continue
                if part == main:
                    field, dimension = name, dimension_for(name, value.get("unit"))
                else:
                    field = f"{name}_{part}"
                    dimension = time if part in _TIME_FIELDS else dimension_for(field, None)
                    if part in _FIELD_DIMENSIONS and main is None:
                        dimension = quantities.dimension(_FIELD_DIMENSIONS[part])
                found[field] = Claimable(
                    field, None if number is None else float(number), dimension,
                    magnitude=extreme and part == main,
                    note="magnitude of the peak" if extreme and part == main else "")
    return found


def _nested(found: dict[str, Claimable], prefix: str, table: Mapping[str, Any]) -> None:
    for part, number in table.items():
        if part in _FIELD_DIMENSIONS and (number is None or _is_number(number)):
            found[f"{prefix}_{part}"] = Claimable(
                f"{prefix}_{part}", None if number is None else float(number),
                quantities.dimension(_FIELD_DIMENSIONS[part]))


def check_claim_names(claims: Mapping[str, Any], claimable: Mapping[str, Claimable],
                      error: Error) -> None:
    """Every key of [claims] is a special key or a claimable result name."""
    names = sorted(set(claimable) | set(SPECIAL_KEYS))
    for key in claims:
        if key in SPECIAL_KEYS or key in claimable:
            continue
        close = difflib.get_close_matches(key, names, n=1)
        hint = f"; did you mean '{close[0]}'?" if close else ""
        raise error(f"claims.{key}", f"unknown claim {quote(key)}{hint} (claimable here: "
                                     f"{', '.join(names)})")


def claimed_number(reader, value: Any, dimension, key: str, values: Mapping) -> float:
    """A claimed value in SI (with the case's symbols and their values)."""
    if dimension is None:
        dimension = _dimension_as_given(value, key)
    quantity = reader.quantity(value, dimension, key)
    return float(sympy.N(quantity.subs(values), 30))


def _dimension_as_given(value: Any, key: str):
    """For a result whose JSON carries no unit: the dimension the claim writes."""
    if isinstance(value, str):
        parts = value.strip().split(None, 1)
        if len(parts) == 2:
            return quantities.dimension_of_unit(parts[1], key=key)
    return quantities.DIMENSIONLESS


# ----------------------------------------------------------------------------- formulas


@dataclass(frozen=True)
class ClaimedPiece:
    """One claimed formula: the response on start ≤ t < end (end None: to ``until``), in SI
    and the global time t; ``local`` is the same in the local time t − start as a sum of
    u^k·e^(σu)·cos/sin(ωu) terms (None where the formula is not of that form)."""

    key: str
    number: int
    start: sympy.Expr
    end: sympy.Expr | None
    formula: sympy.Expr
    local: ExponentialPolynomial | None
    text: str


@dataclass(frozen=True)
class ClaimedValue:
    """A claimed value of the response at one time (SI)."""

    key: str
    number: int
    time: sympy.Expr
    value: sympy.Expr
    shown_time: str
    shown_value: str


def _items(raw: Any, key: str, fields: tuple[str, ...], shape: str, error: Error) -> list:
    if not isinstance(raw, list) or not raw:
        raise error(key, f"expected a list of {shape} tables")
    for number, item in enumerate(raw, start=1):
        where = f"{key}[{number}]"
        if not isinstance(item, Mapping):
            raise error(where, f"expected a table {shape}")
        unknown = [name for name in item if name not in fields]
        if unknown:
            raise error(f"{where}.{unknown[0]}",
                        f"unknown key {quote(unknown[0])} (expected {', '.join(fields)})")
    return raw


def read_response_claims(case, reader, raw: Any, until: sympy.Expr, time_symbol: sympy.Symbol,
                         error: Error) -> list[ClaimedPiece]:
    """The claimed formulas, each checked to lie inside [0, until] with from < to."""
    fields = ("from", "to", "expr", "expr_unit", "time_unit")
    items = _items(raw, "claims.response", fields, "{ from = …, to = …, expr = … }", error)
    names: dict[str, sympy.Expr] = {d.name: d.symbol for d in case.symbols}
    names["t"] = time_symbol
    values = case.symbol_values()
    response = case.system.response_dimension
    pieces = []
    for number, item in enumerate(items, start=1):
        key = f"claims.response[{number}]"
        if not isinstance(item.get("expr"), str):
            raise error(f"{key}.expr", "missing (the response on the interval: a formula in t, "
                                       "in SI units unless expr_unit and time_unit are given)")
        start = reader.quantity(item.get("from", 0), "time", f"{key}.from")
        end = reader.quantity(item["to"], "time", f"{key}.to") if "to" in item else None
        scale, time_scale = sympy.S.One, sympy.S.One
        if "expr_unit" in item:
            scale, dimension = _unit(item["expr_unit"], f"{key}.expr_unit", error)
            if dimension != response:
                raise error(f"{key}.expr_unit", f"wrong dimension (expected "
                                                f"{quantities.describe(response)}, got "
                                                f"{quantities.describe(dimension)})")
        if "time_unit" in item:
            time_scale, dimension = _unit(item["time_unit"], f"{key}.time_unit", error)
            if dimension != quantities.dimension("time"):
                raise error(f"{key}.time_unit", f"wrong dimension (expected time, got "
                                                f"{quantities.describe(dimension)})")
        written = parse_expression(item["expr"], names=names, key=f"{key}.expr")
        # The formula gives the response in expr_unit for t in time_unit: t_written = t/unit.
        formula = sympy.expand(scale * written.subs(time_symbol, time_symbol / time_scale)) \
            if (scale != 1 or time_scale != 1) else written
        low = _number(start, values)
        high = _number(end if end is not None else until, values)
        window = _number(until, values)
        if low < 0:
            raise error(f"{key}.from", "must not be negative (the window starts at t = 0)")
        if not high > low:
            raise error(f"{key}.to", "must be later than from")
        if high > window * (1 + sympy.Rational(1, 10**12)):
            raise error(f"{key}.to", f"after the end of the analysis window (until = "
                                     f"{sympy.N(window, 6)} s)")
        local = exponential_polynomial(formula.subs(values), time_symbol, start.subs(values))
        text = item["expr"]
        if "expr_unit" in item or "time_unit" in item:
            text += (f" (in {item.get('expr_unit', quantities.si_unit_text(response))}, "
                     f"t in {item.get('time_unit', 's')})")
        pieces.append(ClaimedPiece(f"response[{number}]", number, start, end, formula, local,
                                   text))
    return pieces


def read_value_claims(case, reader, raw: Any, until: sympy.Expr, error: Error
                      ) -> list[ClaimedValue]:
    items = _items(raw, "claims.at", ("time", "value"), "{ time = …, value = … }", error)
    values = case.symbol_values()
    claimed = []
    for number, item in enumerate(items, start=1):
        key = f"claims.at[{number}]"
        for name in ("time", "value"):
            if name not in item:
                raise error(f"{key}.{name}", "missing (expected { time = \"30 ms\", value = "
                                             "\"4.1 mm\" })")
        time = reader.quantity(item["time"], "time", f"{key}.time")
        value = reader.quantity(item["value"], case.system.response_dimension, f"{key}.value")
        instant = _number(time, values)
        if instant < 0 or instant > _number(until, values):
            raise error(f"{key}.time", "outside the analysis window")
        claimed.append(ClaimedValue(f"at[{number}]", number, time, value,
                                    str(item["time"]), str(item["value"])))
    return claimed


def _unit(value: Any, key: str, error: Error):
    if not isinstance(value, str):
        raise error(key, f"expected a unit such as \"mm\", got {type(value).__name__}")
    return quantities.unit_factor(value, key=key)


def _number(value: sympy.Expr, values: Mapping) -> sympy.Float:
    return sympy.N(sympy.sympify(value).subs(values), 30)


class _NotExponential(Exception):
    pass


def exponential_polynomial(formula: sympy.Expr, time: sympy.Symbol,
                           start: sympy.Expr) -> ExponentialPolynomial | None:
    """``formula`` (in the global time) as Σ c·u^k·e^(σu)·cos|sin(ωu), u = t − start, or
    None when it is not a finite sum of such terms.

    sin, cos, sinh, cosh are written as exponentials (Euler), the product expanded, and the
    terms e^((σ ± iω)u) gathered back into cos and sin modes.
    """
    u = sympy.Symbol("u", real=True)
    try:
        expression = formula.subs(time, u + start).rewrite(sympy.exp)
        expression = sympy.expand(expression, power_exp=True, mul=True, multinomial=True,
                                  power_base=False, log=False)
        groups: dict[tuple[int, sympy.Expr], sympy.Expr] = {}
        for term in sympy.Add.make_args(expression):
            coefficient, rest = term.as_independent(u, as_Add=False)
            power, rate = 0, sympy.S.Zero
            for factor in sympy.Mul.make_args(rest):
                if factor == 1:
                    continue
                base, exponent = factor.as_base_exp()
                if base == u and exponent.is_Integer and exponent > 0:
                    power += int(exponent)
                elif isinstance(factor, sympy.exp) or base is sympy.E:
                    argument = sympy.expand(factor.args[0] if isinstance(factor, sympy.exp)
                                            else exponent)
                    slope = argument.coeff(u, 1)
                    constant = sympy.expand(argument - slope * u)
                    if constant.has(u) or slope.has(u):
                        raise _NotExponential
                    rate += slope
                    coefficient *= sympy.exp(constant)
                else:
                    raise _NotExponential
            rate = sympy.expand(rate)
            groups[(power, rate)] = groups.get((power, rate), sympy.S.Zero) + coefficient
        pairs = []
        done = set()
        for (power, rate), coefficient in groups.items():
            if (power, rate) in done:
                continue
            sigma, omega = sympy.re(rate), sympy.im(rate)
            if omega == 0:
                value = _real(coefficient)
                pairs.append((BasisTerm(power, sigma, sympy.S.Zero, COS), value))
                done.add((power, rate))
                continue
            positive = sympy.expand(sigma + sympy.I * abs(omega))
            negative = sympy.expand(sigma - sympy.I * abs(omega))
            c_plus = groups.get((power, positive), sympy.S.Zero)
            c_minus = groups.get((power, negative), sympy.S.Zero)
            done.update({(power, positive), (power, negative)})
            pairs.append((BasisTerm(power, sigma, abs(omega), COS), _real(c_plus + c_minus)))
            pairs.append((BasisTerm(power, sigma, abs(omega), SIN),
                          _real(sympy.I * (c_plus - c_minus))))
        return ExponentialPolynomial.from_terms(pairs)
    except (_NotExponential, ValueError, TypeError):
        return None


def _real(value: sympy.Expr) -> sympy.Expr:
    value = sympy.nsimplify(sympy.expand_complex(value), rational=False) \
        if value.has(sympy.I) else value
    value = sympy.simplify(sympy.expand_complex(value))
    if sympy.simplify(sympy.im(value)) != 0:
        raise _NotExponential
    return sympy.re(value) if value.has(sympy.I) else value


# ----------------------------------------------------------------------------- locating


def claim_line(text: str, key: str) -> int | None:
    """The line of ``claims.response[N]…`` / ``claims.at[N]…`` in the TOML text: the N-th
    inline table of the array (or the N-th ``[[claims.response]]`` table), and within it the
    line of the field; None when it cannot be found (the caller falls back to the table)."""
    match = re.fullmatch(r"claims\.(\w+)\[(\d+)\](?:\.(\w+))?", key)
    if match is None or not text:
        return None
    array, index, leaf = match.group(1), int(match.group(2)), match.group(3)
    lines = text.split("\n")
    starts = [0]
    for line in lines:
        starts.append(starts[-1] + len(line) + 1)

    def line_at(offset: int) -> int:
        return next(i for i in range(len(lines)) if starts[i + 1] > offset) + 1

    headers = [i for i, line in enumerate(lines)
               if re.match(rf"\s*\[\[\s*claims\s*\.\s*{array}\s*\]\]", line)]
    if len(headers) >= index:
        first = headers[index - 1]
        last = next((i for i in range(first + 1, len(lines)) if re.match(r"\s*\[", lines[i])),
                    len(lines))
        for i in range(first + 1, last):
            if leaf and re.match(rf"\s*{leaf}\s*=", lines[i]):
                return i + 1
        return first + 1
    table = next((i for i, line in enumerate(lines) if re.match(r"\s*\[\s*claims\s*\]", line)),
                 None)
    if table is None:
        return None
    found = None
    for i in range(table + 1, len(lines)):
        if re.match(r"\s*\[", lines[i]) and not re.match(rf"\s*{array}\s*=", lines[i]):
            break
        if re.match(rf"\s*{array}\s*=", lines[i]):
            found = i
            break
    if found is None:
        return None
    offset = starts[found] + lines[found].index("=") + 1
    items = _inline_tables(text, offset)
    if len(items) < index:
        return found + 1
    low, high = items[index - 1]
    if leaf:
        inner = re.search(rf"(?<![\w\"']){leaf}\s*=", text[low:high])
        if inner:
            return line_at(low + inner.start())
    return line_at(low)


def _inline_tables(text: str, offset: int) -> list[tuple[int, int]]:
    """(start, end) offsets of the inline tables directly inside the array at ``offset``."""
    depth, brace, quote_char, start = 0, 0, None, None
    found = []
    i = offset
    while i < len(text):
        char = text[i]
        if quote_char:
            if char == "\\" and quote_char == '"':
                i += 2
                continue
            if char == quote_char:
                quote_char = None
        elif char in "\"'":
            quote_char = char
        elif char == "#":
            while i < len(text) and text[i] != "\n":
                i += 1
            continue
        elif char == "[":
            depth += 1
        elif char == "]":
            depth -= 1
            if depth <= 0 and brace == 0:
                break
        elif char == "{":
            if brace == 0 and depth == 1:
                start = i
            brace += 1
        elif char == "}":
            brace -= 1
            if brace == 0 and depth == 1 and start is not None:
                found.append((start, i + 1))
                start = None
        i += 1
    return found


def locate_claim(error: CaseError, path: str | Path) -> CaseError:
    """``error`` located like every other input error: FILE:LINE: KEY: message."""
    from .case import MAX_CASE_BYTES, display_name, locate, read_limited

    if error.line is None and error.key and error.key.startswith("claims."):
        try:
            text = read_limited(Path(path), MAX_CASE_BYTES, display_name(str(path)),
                                "the case file").decode()
        except (CaseError, UnicodeDecodeError):
            text = ""
        line = claim_line(text, error.key)
        if line is not None:
            error = CaseError(error.message, file=error.file, key=error.key, line=line)
    return locate(error, path)

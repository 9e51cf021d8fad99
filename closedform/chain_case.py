"""Reading the case of several masses: ``model = "chain"`` and ``model = "matrix"``.

A chain is masses in a line: spring (and damper) i joins mass i−1 to mass i, the support
for i = 1. A matrix model gives the mass, stiffness and (optionally) damping matrices
directly. Either way the equation of motion is M x″ + C x′ + K x = f(t) (force
excitation; x absolute) or M u″ + C u′ + K u = −M·1·a_g(t) (support acceleration; u
relative to the support), with M, K symmetric positive definite and C symmetric positive
semi-definite, all in exact SI.

Damping is one of: ``dampers`` (chain) or ``damping_matrix`` (matrix); ``damping_ratio``
(one number for every mode, or a list, one per mode in order of rising frequency);
``rayleigh = { mass = "a0 1/s", stiffness = "a1 s" }`` (C = a0·M + a1·K); none (undamped).

The case reader of ``case.py`` hands its reader object here (``read_chain_case``); every
mistake is a CaseError naming the key, located like every other input error.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any

import sympy

from . import quantities

CHAIN_MODELS = ("chain", "matrix")
MAX_MASSES = 6
EXCITATIONS = ("force", "support-acceleration")
_COMMON = ("model", "damping_ratio", "rayleigh", "excitation")
SYSTEM_KEYS = {
    "chain": ("masses", "stiffnesses", "dampers") + _COMMON,
    "matrix": ("mass_matrix", "stiffness_matrix", "damping_matrix") + _COMMON,
}
INITIAL_KEYS = ("displacements", "velocities")
TOP_KEYS = ("title", "reference", "system", "initial", "load", "report", "symbols", "claims")


@dataclass(frozen=True)
class Spring:
    """A spring (with its damper, if any) joining mass ``first`` to mass ``second``; mass 0
    is the support. Its stretch is x_second − x_first."""

    number: int
    first: int
    second: int
    stiffness: sympy.Expr
    damping: sympy.Expr | None      # None: the damping is not given element by element


@dataclass(frozen=True)
class ChainSpec:
    """The several-mass system of a case, exact SI.

    ``damping_matrix`` is the given or Rayleigh matrix (None for per-mode ratios or
    undamped); ``damping_ratios`` the per-mode ratios when given as ratios.
    """

    model: str
    mass_matrix: sympy.ImmutableMatrix
    stiffness_matrix: sympy.ImmutableMatrix
    damping_matrix: sympy.ImmutableMatrix | None
    damping_ratios: tuple[sympy.Expr, ...] | None
    damping_source: str          # "none" | "ratio" | "rayleigh" | "dampers" | "matrix"
    rayleigh: tuple[sympy.Expr, sympy.Expr] | None
    excitation: str
    springs: tuple[Spring, ...]
    load_masses: tuple[int | None, ...]   # per [[load]], the mass it acts on (force)
    initial_displacements: tuple[sympy.Expr, ...]
    initial_velocities: tuple[sympy.Expr, ...]
    watch: int

    @property
    def size(self) -> int:
        return self.mass_matrix.shape[0]

    @property
    def at_rest(self) -> bool:
        return all(v == 0 for v in self.initial_displacements + self.initial_velocities)


def _shown(value: Any) -> str:
    if isinstance(value, str):
        return repr(value[:40])
    if isinstance(value, list):
        return f"a list of {len(value)}"
    return type(value).__name__ if not isinstance(value, (int, float)) else repr(value)


def _number_list(reader, data: Mapping[str, Any], name: str, dimension: str, size: int | None,
                 *, positive: bool) -> list[sympy.Expr]:
    key = f"system.{name}"
    raw = data[name]
    if not isinstance(raw, list) or not raw:
        raise reader.error(key, f"expected a list of quantities, one per mass, got {_shown(raw)}")
    if size is not None and len(raw) != size:
        raise reader.error(key, f"expected {size} values, one per mass (as many as "
                                f"system.masses), got {len(raw)}")
    values = []
    for i, item in enumerate(raw):
        value = reader.quantity(item, dimension, f"{key}[{i}]")
        if value.free_symbols:
            raise reader.error(f"{key}[{i}]", "several masses need numbers, not symbols")
        if positive:
            reader.positive(value, f"{key}[{i}]", dimension=dimension)
        else:
            reader.non_negative(value, f"{key}[{i}]", dimension=dimension)
        values.append(value)
    return values


def _matrix(reader, data: Mapping[str, Any], name: str, dimension: str, size: int | None
            ) -> sympy.ImmutableMatrix:
    key = f"system.{name}"
    raw = data[name]
    if not isinstance(raw, list) or not raw or not all(isinstance(row, list) for row in raw):
        raise reader.error(key, f"expected a square matrix as a list of rows, got {_shown(raw)}")
    n = len(raw) if size is None else size
    if len(raw) != n or any(len(row) != n for row in raw):
        lengths = ", ".join(str(len(row)) for row in raw)
        raise reader.error(key, f"expected {n} rows of {n} values (a square matrix"
                                f"{'' if size is None else ' the size of system.mass_matrix'}), "
                                f"got {len(raw)} rows of {lengths}")
    if n > MAX_MASSES:
        raise reader.error(key, f"too many masses (at most {MAX_MASSES}, got {n})")
    rows = []
    for i, row in enumerate(raw):
        values = []
        for j, item in enumerate(row):
            value = reader.quantity(item, dimension, f"{key}[{i}][{j}]")
            if value.free_symbols:
                raise reader.error(f"{key}[{i}][{j}]", "several masses need numbers, not symbols")
            values.append(value)
        rows.append(values)
    matrix = sympy.ImmutableMatrix(rows)
    for i in range(n):
        for j in range(i + 1, n):
            if matrix[i, j] != matrix[j, i]:
                raise reader.error(key, f"not symmetric (entry [{i}][{j}] is "
                                        f"{_plain(matrix[i, j])}, entry [{j}][{i}] is "
                                        f"{_plain(matrix[j, i])})")
    return matrix


def _plain(value: sympy.Expr) -> str:
    return str(value) if value.is_Integer else f"{float(value):.6g}"


def definiteness_problem(matrix: sympy.ImmutableMatrix, *, semi: bool) -> str | None:
    """None when the symmetric ``matrix`` is positive definite (``semi``: semi-definite),
    else what is wrong: the leading minor (definite) or eigenvalue (semi) that fails.
    Exact: Sylvester's criterion for definiteness (Horn & Johnson, Matrix Analysis, 2nd ed.,
    Theorem 7.2.5); for semi-definiteness the exact LDLᵀ pivots with symmetric pivoting."""
    n = matrix.shape[0]
    if not semi:
        for k in range(1, n + 1):
            minor = matrix[:k, :k].det()
            if not minor > 0:
                return f"its leading {k}×{k} minor is {_plain(minor)}, not positive"
        return None
    # semi-definite: every principal minor ≥ 0 (exact; at most 2^6 − 1 of them)
    from itertools import combinations
    for k in range(1, n + 1):
        for rows in combinations(range(n), k):
            minor = matrix.extract(list(rows), list(rows)).det()
            if minor < 0:
                shown = ", ".join(str(r + 1) for r in rows)
                return f"its principal minor of rows {shown} is {_plain(minor)}, negative"
    return None


def _ratios(reader, raw: Any, n: int) -> tuple[sympy.Expr, ...]:
    key = "system.damping_ratio"
    items = raw if isinstance(raw, list) else [raw]
    if isinstance(raw, list) and len(raw) != n:
        raise reader.error(key, f"expected one number for every mode or a list of {n}, one per "
                                f"mode, got {len(raw)}")
    ratios = []
    for i, item in enumerate(items):
        where = f"{key}[{i}]" if isinstance(raw, list) else key
        value = reader.non_negative(reader.quantity(item, "dimensionless", where), where)
        if not value < 1:
            raise reader.error(where, f"expected a ratio below 1 for every mode (under-damped "
                                      f"modes), got {_plain(value)}")
        ratios.append(value)
    return tuple(ratios) if isinstance(raw, list) else tuple(ratios) * n


def _springs_of_matrix(stiffness: sympy.ImmutableMatrix, damping) -> tuple[Spring, ...]:
    """The springs a stiffness matrix stands for, when it is a network of springs
    (off-diagonal entries ≤ 0, row sums ≥ 0): −k_ij between masses i and j, the row sum
    between mass i and the support. Otherwise none (no element forces are reported)."""
    n = stiffness.shape[0]
    if any(stiffness[i, j] > 0 for i in range(n) for j in range(n) if i != j):
        return ()
    springs: list[Spring] = []
    for i in range(n):
        to_support = sum(stiffness[i, :])
        if to_support < 0:
            return ()
        if to_support > 0:
            c = sum(damping[i, :]) if damping is not None else None
            springs.append(Spring(len(springs) + 1, 0, i + 1, to_support, c))
    for i in range(n):
        for j in range(i + 1, n):
            if stiffness[i, j] != 0:
                c = -damping[i, j] if damping is not None else None
                springs.append(Spring(len(springs) + 1, i + 1, j + 1, -stiffness[i, j], c))
    return tuple(springs)


def read_system(reader, data: Mapping[str, Any]):
    """(ChainSpec fields without loads/initial/watch, load dimension)."""
    model = data["model"]
    reader.check_keys(data, SYSTEM_KEYS[model], "system")
    given = [name for name in ("dampers", "damping_matrix", "damping_ratio", "rayleigh")
             if name in data]
    if len(given) > 1:
        raise reader.error(f"system.{given[1]}", f"give one of {given[0]} and {given[1]}, not both")
    damping = None
    if model == "chain":
        for name in ("masses", "stiffnesses"):
            if name not in data:
                raise reader.error(f"system.{name}", f"missing (the chain model needs {name})")
        masses = _number_list(reader, data, "masses", "mass", None, positive=True)
        n = len(masses)
        if n > MAX_MASSES:
            raise reader.error("system.masses", f"too many masses (at most {MAX_MASSES}, got {n})")
        stiff = _number_list(reader, data, "stiffnesses", "stiffness", n, positive=True)
        dampers = _number_list(reader, data, "dampers", "damping", n, positive=False) \
            if "dampers" in data else None
        mass_matrix = sympy.ImmutableMatrix(sympy.diag(*masses))
        k = sympy.zeros(n, n)
        c = sympy.zeros(n, n)
        springs = []
        for i in range(n):
            k[i, i] += stiff[i]
            if dampers is not None:
                c[i, i] += dampers[i]
            if i > 0:
                k[i - 1, i - 1] += stiff[i]
                k[i - 1, i] -= stiff[i]
                k[i, i - 1] -= stiff[i]
                if dampers is not None:
                    c[i - 1, i - 1] += dampers[i]
                    c[i - 1, i] -= dampers[i]
                    c[i, i - 1] -= dampers[i]
            springs.append(Spring(i + 1, i, i + 1, stiff[i],
                                  dampers[i] if dampers is not None else None))
        stiffness_matrix = sympy.ImmutableMatrix(k)
        if dampers is not None:
            damping = sympy.ImmutableMatrix(c)
        springs = tuple(springs)
    else:
        for name in ("mass_matrix", "stiffness_matrix"):
            if name not in data:
                raise reader.error(f"system.{name}", f"missing (the matrix model needs {name})")
        mass_matrix = _matrix(reader, data, "mass_matrix", "mass", None)
        n = mass_matrix.shape[0]
        problem = definiteness_problem(mass_matrix, semi=False)
        if problem:
            raise reader.error("system.mass_matrix", f"not positive definite ({problem})")
        stiffness_matrix = _matrix(reader, data, "stiffness_matrix", "stiffness", n)
        problem = definiteness_problem(stiffness_matrix, semi=False)
        if problem:
            raise reader.error("system.stiffness_matrix", "not positive definite (" + problem
                               + "; a free-floating system has no static response here)")
        if "damping_matrix" in data:
            damping = _matrix(reader, data, "damping_matrix", "damping", n)
            problem = definiteness_problem(damping, semi=True)
            if problem:
                raise reader.error("system.damping_matrix",
                                   f"not positive semi-definite ({problem})")
        springs = None
    ratios = None
    rayleigh = None
    source = "none"
    if damping is not None:
        source = "dampers" if model == "chain" else "matrix"
    elif "damping_ratio" in data:
        ratios = _ratios(reader, data["damping_ratio"], n)
        source = "ratio"
    elif "rayleigh" in data:
        table = reader.table(data["rayleigh"], "system.rayleigh")
        reader.check_keys(table, ("mass", "stiffness"), "system.rayleigh")
        a0 = reader.non_negative(reader.quantity(table.get("mass", 0), "frequency",
                                                 "system.rayleigh.mass"), "system.rayleigh.mass")
        a1 = reader.non_negative(reader.quantity(table.get("stiffness", 0), "time",
                                                 "system.rayleigh.stiffness"),
                                 "system.rayleigh.stiffness")
        rayleigh = (a0, a1)
        damping = sympy.ImmutableMatrix(a0 * mass_matrix + a1 * stiffness_matrix)
        source = "rayleigh"
    if springs is None:
        springs = _springs_of_matrix(stiffness_matrix, damping if source == "matrix" else None)
    excitation = data.get("excitation", "force")
    if excitation not in EXCITATIONS:
        raise reader.error("system.excitation", f"expected one of {', '.join(EXCITATIONS)}, "
                                                f"got {_shown(excitation)}")
    return dict(model=model, mass_matrix=mass_matrix, stiffness_matrix=stiffness_matrix,
                damping_matrix=damping, damping_ratios=ratios, damping_source=source,
                rayleigh=rayleigh, excitation=excitation, springs=springs)


def read_chain_case(reader, data: Mapping[str, Any], build_case):
    """The Case of a several-mass case file. ``build_case(system, loads, report)`` is the
    reader's constructor of the Case (title, reference, claims are read there)."""
    from .specs import SystemSpec

    if data.get("symbols"):
        raise reader.error("symbols", "several masses need numbers; [symbols] are not "
                                      "supported for the chain and matrix models")
    fields = read_system(reader, reader.table(data["system"], "system"))
    n = fields["mass_matrix"].shape[0]
    force = fields["excitation"] == "force"
    d = quantities.dimension
    load_dimension = d("force") if force else d("acceleration")
    system = SystemSpec(fields["model"], MappingProxyType({}), None, load_dimension, d("length"))
    loads_data = data.get("load", [])
    if not isinstance(loads_data, list):
        raise reader.error("load", "loads are given as [[load]] tables")
    loads, masses = [], []
    for number, item in enumerate(loads_data, start=1):
        item = dict(reader.table(item, f"load[{number}]"))
        key = f"load[{number}].mass"
        if "mass" in item:
            if not force:
                raise reader.error(key, "a support acceleration acts on every mass; mass is "
                                        "only for excitation = \"force\"")
            mass = item.pop("mass")
            if isinstance(mass, bool) or not isinstance(mass, int) or not 1 <= mass <= n:
                raise reader.error(key, f"no such mass (expected a mass number from 1 to {n}, "
                                        f"got {_shown(mass)})")
            masses.append(mass)
        elif force:
            raise reader.error(f"load[{number}]", f"missing mass (the mass number, 1 to {n}, "
                                                  "the force acts on)")
        else:
            masses.append(None)
        loads.append(reader.load(item, number, load_dimension))
    loads = tuple(loads)
    reader.breakpoint_limit(loads)
    displacements = velocities = (sympy.S.Zero,) * n
    if data.get("initial") is not None:
        initial = reader.table(data["initial"], "initial")
        reader.check_keys(initial, INITIAL_KEYS, "initial")
        lists = {}
        for name, dimension in (("displacements", "length"), ("velocities", "velocity")):
            if name in initial:
                raw = initial[name]
                if not isinstance(raw, list) or len(raw) != n:
                    raise reader.error(f"initial.{name}", f"expected {n} values, one per mass, "
                                                          f"got {_shown(raw)}")
                lists[name] = tuple(reader.quantity(v, dimension, f"initial.{name}[{i}]")
                                    for i, v in enumerate(raw))
        displacements = lists.get("displacements", displacements)
        velocities = lists.get("velocities", velocities)
    report_data = dict(reader.table(data.get("report", {}), "report"))
    watch = report_data.pop("watch", 1)
    if isinstance(watch, bool) or not isinstance(watch, int) or not 1 <= watch <= n:
        raise reader.error("report.watch", f"no such mass (expected a mass number from 1 to "
                                           f"{n}, got {_shown(watch)})")
    report = reader.report(report_data, system)
    chain = ChainSpec(load_masses=tuple(masses), initial_displacements=displacements,
                      initial_velocities=velocities, watch=watch, **fields)
    return build_case(system, loads, report, chain)

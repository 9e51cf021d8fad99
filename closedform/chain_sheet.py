"""The derivation sheet of a case of several masses (Markdown, LaTeX, PDF, plots).

Nothing is derived here: the matrices, the characteristic polynomial, the modes, each
modal equation's scalar solution and the responses come from ``chain.ChainDerivation``;
this module only formats them through the project's typesetting helpers and the templates
``chain.md.j2`` / ``chain.tex.j2``.
"""

from __future__ import annotations

import io
from pathlib import Path
from typing import Any

import numpy
import sympy

from . import __version__, quantities
from .render import (
    CAUTION,
    COMMON_ASSUMPTIONS,
    MARKDOWN,
    Document,
    Flavour,
    Math,
    Units,
    display,
    inline,
    latex_escape,
    latex_preamble,
    make_environment,
    markdown_escape,
    number,
    ordered_terms,
    slug,
    typeset,
)

SHOWN_DIGITS = 6           # digits of the 30-digit coefficients printed in the pieces
PIECES_SHOWN = 12          # intervals printed per response before an excerpt
ASSUMPTIONS = [
    "linear elastic springs, lumped masses, small displacements along one line of motion",
    "viscous (velocity-proportional) damping: {damping}",
    "{excitation}",
]
EXCITATION_TEXT = {
    "force": "forces act on the masses named in each load; x is measured from the rest "
             "position (absolute)",
    "support-acceleration": "rigid support moving with the given acceleration; x is the "
                            "displacement of each mass relative to the support",
}
DAMPING_TEXT = {
    "none": "none (undamped)",
    "ratio": "classical, given as a damping ratio per mode",
    "rayleigh": "classical, Rayleigh C = a0·M + a1·K",
    "dampers": "dampers between the masses as given",
    "matrix": "the damping matrix as given",
}
T_LOCAL = sympy.Symbol(r"\hat{t}")
T = sympy.Symbol("t")


def _rounded(expr: sympy.Expr, digits: int = SHOWN_DIGITS) -> sympy.Expr:
    """Floats (30-digit coefficients) shown to ``digits``; exact numbers kept."""
    return expr.xreplace({f: sympy.Float(f"{float(f):.{digits}g}", 30)
                          for f in expr.atoms(sympy.Float)})


def _math(expr: Any, digits: int = SHOWN_DIGITS) -> Math:
    return inline(typeset(_rounded(sympy.sympify(expr), digits), digits))


def _terms(expr: sympy.Expr, digits: int = SHOWN_DIGITS) -> list[str]:
    expr = _rounded(sympy.sympify(expr), digits)
    return [typeset(term, digits) for term in (ordered_terms(expr) if expr != 0 else [sympy.S.Zero])]


def _matrix(matrix: sympy.ImmutableMatrix) -> Math:
    rows = [" & ".join(str(typeset(_rounded(matrix[i, j]))) for j in range(matrix.shape[1]))
            for i in range(matrix.shape[0])]
    return Math(r"\begin{bmatrix} " + r" \\ ".join(rows) + r" \end{bmatrix}")


def _vector(values) -> Math:
    return Math(r"\begin{bmatrix} " + r" \\ ".join(str(typeset(_rounded(sympy.sympify(v))))
                                                  for v in values) + r" \end{bmatrix}")


def _exact_or_digits(value: sympy.Expr, exact: bool) -> Math:
    """An exact value with its decimal, or a 30-digit value written out in full."""
    if exact:
        shown = typeset(value)
        decimal = number(float(sympy.N(value, 30)), SHOWN_DIGITS)
        return inline(shown if shown == decimal else f"{shown} \\approx {decimal}")
    return inline(sympy.N(value, 30).__str__())


def _pieces(pieces, lhs: str, limit: int = PIECES_SHOWN) -> list[dict]:
    rows = []
    pieces = list(pieces)
    chosen = range(len(pieces)) if len(pieces) <= limit else \
        list(range(limit - 2)) + [None] + [len(pieces) - 2, len(pieces) - 1]
    for k in chosen:
        if k is None:
            rows.append({"gap": f"… {len(pieces) - limit + 1} intervals more (all of them in "
                                "the JSON result) …"})
            continue
        piece = pieces[k]
        end = typeset(piece.end) if piece.end is not None else Math(r"t_{\mathrm{end}}")
        expression = piece.local.expression(T_LOCAL)
        rows.append({"number": k + 1, "interval": inline(f"{typeset(piece.start)} \\le t < {end}"),
                     "local": Math(r"$\hat{t} = t - " + str(typeset(piece.start)) + "$")
                     if piece.start != 0 else Math(r"$\hat{t} = t$"),
                     "equation": display(lhs, _terms(expression))})
    return rows


def _figure(derivation, fmt: str, units: Units) -> bytes:
    """Every mass's displacement over the window, the watched mass's peak marked."""
    import matplotlib
    from matplotlib.figure import Figure

    from .plots import FIGURE_SIZE, MARGINS, PEAK_COLOUR, STYLE

    until = float(sympy.N(derivation.until, 30))
    length = units.unit_for(quantities.dimension("length"), ("displacement",))
    time = units.unit_for(quantities.dimension("time"), ("time",))
    scale = 1 / float(length.factor) if length else 1.0
    time_scale = 1 / float(time.factor) if time else 1.0
    colours = ["#1d4e89", "#8c510a", "#2e7d32", "#5b2a86", "#c77c02", "#00838f"]
    with matplotlib.rc_context(STYLE):
        figure = Figure(figsize=FIGURE_SIZE)
        figure.subplots_adjust(**MARGINS)
        axes = figure.subplots()
        for index, response in enumerate(derivation.masses):
            times, values = [], []
            for piece in response.pieces:
                start = float(sympy.N(piece.start, 30))
                end = float(sympy.N(piece.end, 30)) if piece.end is not None else until
                grid = numpy.linspace(start, end, max(8, int(1600 * (end - start) / until)))
                function = piece.numeric if piece.numeric is not None else piece.local.numeric()
                times.append(grid)
                values.append(function.evaluate_float(grid - start))
            axes.plot(numpy.concatenate(times) * time_scale, numpy.concatenate(values) * scale,
                      color=colours[index % len(colours)], label=f"mass {index + 1}")
        peak = derivation.numbers.peak
        if peak is not None:
            axes.plot([peak.time * time_scale], [peak.value * scale], marker="o", markersize=5,
                      color=PEAK_COLOUR, linestyle="none")
        axes.axhline(0.0, color="#808080", linewidth=0.6)
        axes.set_xlabel(f"t [{time.text if time else 's'}]")
        axes.set_ylabel(f"x [{length.text if length else 'm'}]")
        axes.set_xlim(0.0, until * time_scale)
        axes.legend(loc="upper right", fontsize=7, frameon=False)
        buffer = io.BytesIO()
        metadata = {"Date": None, "Creator": "closedform"} if fmt == "svg" else \
            {"CreationDate": None, "ModDate": None, "Creator": "closedform",
             "Producer": "closedform"}
        figure.savefig(buffer, format=fmt, metadata=metadata)
        return buffer.getvalue()


def figure_name(stem: str, fmt: str) -> str:
    return f"{stem}-masses.{fmt}"


def sheet_context(derivation, target: str, stem: str) -> dict[str, Any]:
    escape = latex_escape if target == "tex" else markdown_escape
    case, chain = derivation.case, derivation.chain
    units = Units(case)
    d = quantities.dimension
    n = chain.size
    force = chain.excitation == "force"

    def show(value, dimension, prefer=()) -> Math:
        si, shown = units.show(value, dimension, prefer)
        return Math(f"{si} ({shown})") if shown is not None else si

    elements = []
    if chain.model == "chain":
        for i in range(n):
            spring = chain.springs[i]
            elements.append({"number": i + 1, "mass": show(chain.mass_matrix[i, i], d("mass"), ("mass",)),
                             "stiffness": show(spring.stiffness, d("stiffness"), ("stiffness",)),
                             "damper": show(spring.damping, d("damping"), ("damping",))
                             if spring.damping is not None else None})
    equation = (r"M\,\ddot{\mathbf{x}} + C\,\dot{\mathbf{x}} + K\,\mathbf{x} = \mathbf{f}(t)"
                if force else
                r"M\,\ddot{\mathbf{x}} + C\,\dot{\mathbf{x}} + K\,\mathbf{x} = -M\,\mathbf{1}\,a_g(t)")
    loads = []
    for load in case.loads:
        given = []
        for name in ("amplitude", "impulse", "rate", "duration", "rise", "hold", "fall", "peak_at"):
            if name in load.values:
                dimension = {"amplitude": case.system.load_dimension,
                             "impulse": case.system.load_dimension * d("time"),
                             "rate": case.system.load_dimension / d("time"),
                             "peak_at": d("dimensionless")}.get(name, d("time"))
                given.append(Math(escape(name.replace("_", " ")) + " = "
                                  + show(load.values[name], dimension,
                                         ("force", "acceleration", "time"))))
        if load.shape == "formula":
            given.append(Math(escape("f(τ) = ") + inline(typeset(load.expression))))
        if load.shape == "table":
            given.append(Math(escape(f"{len(load.points)} points, linear between them")))
        mass = chain.load_masses[load.number - 1]
        loads.append({"number": load.number, "label": load.label or None, "shape": load.shape,
                      "mass": str(mass) if mass else escape("support"),
                      "at": show(load.at, d("time"), ("time",)), "given": given})
    rewrites = [{"load": r.load_number, "shape": r.shape, "rule": r.rule, "source": r.source,
                 "terms": len(r.terms)} for r in derivation.history.rewrites]

    # the characteristic equation and the modes ----------------------------------------
    lam = sympy.Symbol(r"\lambda")
    polynomial = derivation.characteristic.subs(sympy.Symbol("lambda", positive=True), lam)
    factored = derivation.factored.subs(sympy.Symbol("lambda", positive=True), lam)
    characteristic = display(r"\det(K - \lambda M)", _terms(sympy.expand(polynomial), 30))
    factored_display = display(r"\det(K - \lambda M)", [typeset(factored, 30)]) \
        if sympy.count_ops(factored) < 60 and factored != polynomial else None
    total_mass = sum(chain.mass_matrix[i, i] for i in range(n)) if chain.mass_matrix.is_diagonal() \
        else sum(chain.mass_matrix)
    modes = []
    for mode in derivation.modes:
        modes.append({
            "number": mode.number,
            "eigenvalue": _exact_or_digits(mode.eigenvalue, mode.exact),
            "omega": _exact_or_digits(mode.omega, mode.exact),
            "hertz": inline(number(float(sympy.N(mode.omega / (2 * sympy.pi), 30)), SHOWN_DIGITS)),
            "period": inline(number(float(sympy.N(2 * sympy.pi / mode.omega, 30)), SHOWN_DIGITS)),
            "shape": inline(_vector(mode.shape)),
            "modal_mass": _math(mode.modal_mass),
            "ratio": _math(mode.damping_ratio) if mode.damping_ratio is not None else None,
            "participation": _math(mode.participation),
            "effective_mass": _math(mode.effective_mass),
            "share": f"{float(mode.effective_mass / total_mass) * 100:.2f} %",
        })
    effective_total = sum(mode.effective_mass for mode in derivation.modes)

    # each modal equation, solved by the scalar engine --------------------------------
    modal = []
    for mode in derivation.modes:
        if mode.solution is None:
            continue
        r = mode.number
        q = f"q_{{{r}}}"
        if force:
            parts = [f"{typeset(_rounded(mode.load_factors[j]))}\\,F_{{{j + 1}}}(t)"
                     for j in range(n) if (j + 1) in chain.load_masses and mode.load_factors[j] != 0]
            load_text = " + ".join(parts) if parts else "0"
        else:
            load_text = f"-{typeset(_rounded(mode.participation))}\\,a_g(t)"
        lhs = (rf"\ddot{{{q}}} + {typeset(_rounded(2 * mode.damping_ratio * mode.omega))}\,"
               rf"\dot{{{q}}} + {typeset(_rounded(mode.eigenvalue))}\,{q}")
        poles = "; ".join(
            f"{typeset(_rounded(p.rate))} \\pm {typeset(_rounded(p.frequency))}\\,i"
            if p.is_pair else str(typeset(_rounded(p.rate))) for p in mode.model.poles)
        transform = mode.solution.transform
        modal.append({
            "number": r, "equation": Math(f"{lhs} = p_{{{r}}}(t) = {load_text}"),
            "initial": Math(f"${q}(0) = {typeset(_rounded(mode.initial[0]))}, \\quad "
                            f"\\dot{{{q}}}(0) = {typeset(_rounded(mode.initial[1]))}$"),
            "poles": inline(poles), "regime": mode.model.regime,
            "transform": display(rf"Q_{{{r}}}(s)", _terms(transform))
            if transform is not None and sympy.count_ops(transform) < 400 else None,
            "pieces": _pieces(mode.solution.pieces, rf"{q}(\hat{{t}})", 4),
        })
    state_space = None
    if derivation.state_space is not None:
        route = derivation.state_space
        poles = []
        for pole in route.modes:
            size = sympy.sqrt(pole.rate**2 + pole.frequency**2)
            poles.append({"number": pole.number,
                          "pole": inline(f"{typeset(_rounded(pole.rate))} \\pm "
                                         f"{typeset(_rounded(pole.frequency))}\\,i")
                          if pole.frequency != 0 else _math(pole.rate),
                          "omega": _math(size), "ratio": _math(-pole.rate / size),
                          "equation": inline(typeset(_rounded(pole.model.characteristic_polynomial())))})
        state_space = {"poles": poles,
                       "polynomial": display(r"\det(M s^2 + C s + K)",
                                             _terms(route.polynomial, 30)),
                       "count": sum(len(pole.solutions) for pole in route.modes)}

    # responses and results ---------------------------------------------------------
    responses = []
    for response in derivation.responses:
        if response.kind == "support-reaction":
            continue
        symbol = f"x_{{{response.name[1:]}}}" if response.kind == "displacement" \
            else f"e_{{{response.name[1:]}}}"
        responses.append({"label": response.label, "kind": response.kind,
                          "pieces": _pieces(response.pieces, rf"{symbol}(\hat{{t}})")})
    results = []
    for response in derivation.responses:
        peak = response.peak
        unit_dimension = d("force") if response.kind == "support-reaction" else d("length")
        prefer = ("force",) if response.kind == "support-reaction" else ("displacement",)
        name = {"displacement": f"peak displacement, {response.label}",
                "stretch": f"peak stretch, {response.label}",
                "support-reaction": "peak support reaction"}[response.kind]
        results.append({"name": name,
                        "value": show(peak.value, unit_dimension, prefer) if peak else None,
                        "time": show(peak.time, d("time"), ("time",)) if peak else None})
        if response.kind == "stretch" and response.spring_force is not None:
            results.append({"name": f"peak spring force, {response.label}",
                            "value": show(response.spring_force.value, d("force"), ("force",)),
                            "time": show(response.spring_force.time, d("time"), ("time",))})
    numbers = derivation.numbers
    summary = {"static": show(numbers.static, d("length"), ("displacement",))
               if numbers.static else None,
               "dlf": inline(number(numbers.dlf)) if numbers.dlf else None}
    failed = [c for c in derivation.checks if not c.passed]
    return {
        "title": case.title, "reference": case.reference or None,
        "case_file": Path(case.source).name, "sha256": case.sha256 or None,
        "version": __version__, "status": derivation.status,
        "passed": derivation.passed, "failed": failed, "check_count": len(derivation.checks),
        "warnings": list(derivation.warnings), "model": chain.model, "size": n,
        "excitation": chain.excitation, "equation": Math(equation),
        "elements": elements,
        "mass_matrix": Math("M = " + _matrix(chain.mass_matrix)),
        "stiffness_matrix": Math("K = " + _matrix(chain.stiffness_matrix)),
        "damping_matrix": Math("C = " + _matrix(derivation.damping_matrix)),
        "damping": DAMPING_TEXT[chain.damping_source],
        "classical": derivation.route == "modal",
        "initial": None if chain.at_rest else {
            "x": Math(r"\mathbf{x}(0) = " + _vector(chain.initial_displacements)),
            "v": Math(r"\dot{\mathbf{x}}(0) = " + _vector(chain.initial_velocities))},
        "loads": loads, "rewrites": rewrites, "characteristic": characteristic,
        "factored": factored_display, "modes": modes,
        "effective_total": _math(effective_total), "total_mass": _math(total_mass),
        "modal": modal, "state_space": state_space, "responses": responses,
        "exact": derivation.exact, "results": results, "summary": summary,
        "watch": chain.watch,
        "window": show(derivation.until, d("time"), ("time",)), "window_note": derivation.window_note,
        "figure": figure_name(stem, "svg" if target == "md" else "pdf"),
        "checks": derivation.checks,
        "assumptions": [ASSUMPTIONS[0], ASSUMPTIONS[1].format(damping=DAMPING_TEXT[chain.damping_source]),
                        EXCITATION_TEXT[chain.excitation]] + COMMON_ASSUMPTIONS,
        "caution": CAUTION,
    }


def _numbering(derivation, stem: str, section: int | None, level: int) -> dict[str, Any]:
    """Headings and numbers of the sheet, alone or as section ``section`` of an appendix."""
    return {"h1": Math("#" * level), "h2": Math("#" * (level + 1)),
            "prefix": f"{section}." if section else "", "suffix": "" if section else ".",
            "title_number": f"{section}. " if section else "",
            "title_prefix": "" if derivation.passed else "FAILED — do not use: ",
            "label": slug(stem), "label_anchor": f"case-{slug(stem)}" if section else None}


def render_markdown(derivation, *, stem: str | None = None, section: int | None = None,
                    level: int = 1) -> str:
    """The sheet as Markdown; ``section`` and ``level`` number and nest it in an appendix."""
    stem = stem or (Path(derivation.case.source).stem or "case")
    context = sheet_context(derivation, "md", stem) | _numbering(derivation, stem, section, level)
    return make_environment("md").get_template("chain.md.j2").render(context)


def render_latex(derivation, standalone: bool = True, *, stem: str | None = None,
                 section: int | None = None) -> str:
    """The sheet as a LaTeX document, or (``standalone=False``) a fragment from \\section."""
    stem = stem or (Path(derivation.case.source).stem or "case")
    environment = make_environment("tex")
    context = sheet_context(derivation, "tex", stem) | _numbering(derivation, stem, section, 1)
    body = environment.get_template("chain.tex.j2").render(context)
    if not standalone:
        return body
    paper = {"a4": "a4paper", "letter": "letterpaper"}[derivation.case.report.paper]
    return environment.get_template("document.tex.j2").render(
        {"preamble": Math(latex_preamble()), "body": Math(body), "title": context["title"],
         "status": context["status"], "label": context["label"], "paper": Math(paper)})


def figure_files(derivation, stem: str, fmt: str) -> dict[str, bytes]:
    """The plot of every mass as a ``fmt`` ("svg" or "pdf") file."""
    return {figure_name(stem, fmt): _figure(derivation, fmt, Units(derivation.case))}


def render_chain_sheet(derivation, flavour: Flavour, *, stem: str | None = None,
                       section: int | None = None, level: int = 1,
                       standalone: bool = True) -> str:
    """The sheet in ``flavour`` (what ``render.render_sheet`` gives for several masses)."""
    if flavour.name == MARKDOWN.name:
        return render_markdown(derivation, stem=stem, section=section, level=level)
    return render_latex(derivation, standalone, stem=stem, section=section)


class ChainSheetDocument(Document):
    """The sheet of several masses as a document for the writers (``render.write_files``):
    md, tex, pdf, json, csv and svg through the same registry as every sheet."""

    kind = "sheet"

    def __init__(self, derivation, stem: str) -> None:
        super().__init__(stem)
        self.derivation = derivation

    def render_text(self, flavour: Flavour) -> str:
        return render_chain_sheet(self.derivation, flavour, stem=self.name)

    def render_figures(self, suffix: str) -> dict[str, bytes]:
        return figure_files(self.derivation, self.name, suffix)

    def json(self) -> str:
        return self.derivation.to_json() + "\n"

    def csv(self) -> str:
        return render_csv(self.derivation)


def render_csv(derivation, points: int = 2000) -> str:
    """Every mass's displacement sampled on an even grid over the window, SI."""
    until = float(sympy.N(derivation.until, 30))
    masses = derivation.masses
    starts = [float(sympy.N(p.start, 30)) for p in masses[0].pieces]
    functions = [[p.numeric if p.numeric is not None else p.local.numeric() for p in r.pieces]
                 for r in masses]
    lines = ["t [s]," + ",".join(f"{r.name} [m]" for r in masses)]
    index = 0
    for k in range(points + 1):
        time = until * k / points
        while index + 1 < len(starts) and starts[index + 1] <= time:
            index += 1
        values = [float(f[index](time - starts[index])) for f in functions]
        lines.append(f"{time:.17g}," + ",".join(f"{v:.17g}" for v in values))
    return "\n".join(lines) + "\n"

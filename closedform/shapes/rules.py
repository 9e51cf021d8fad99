"""The rewrite rules of the load shapes, each with its published source (or, where no book
section was checked, the theorem itself). A shape's definition names the rule it uses;
the sheet prints the rule and its source for every load."""

MACAULAY = ("Macaulay, 'Note on the deflection of beams', Messenger of Mathematics 48 (1919) "
            "129-130 (singularity functions)")
# Where no book section was checked, the theorem itself is cited.
SECOND_SHIFTING = ("time-shift (second shifting) theorem with the unit step, "
                   "f(t − a)·H(t − a) ↔ e^(−as)·F(s)")
DIRAC = "sifting property of the Dirac delta, ∫ g(t)·δ(t − a) dt = g(a)"

RULES = {
    "step": ("step: A·H(t − a)", SECOND_SHIFTING),
    "ramp": ("ramp: r·(t − a)·H(t − a), less r·(t − a − d)·H(t − a − d) where it holds",
             MACAULAY),
    "impulse": ("impulse: J·δ(t − a)", DIRAC),
    "piecewise-linear": ("piecewise-linear pulse: a step at every jump and a ramp at every "
                         "change of slope", MACAULAY),
    "window": ("windowed function: f(t − a)·H(t − a) − f(t − a)·H(t − a − d), the second "
               "term re-expanded about a + d", SECOND_SHIFTING),
}

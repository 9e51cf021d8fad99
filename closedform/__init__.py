"""closedform: exact piecewise responses of linear models to load histories, with checks.

Typical use::

    import closedform
    case = closedform.load_case("worked_cases/drop-hammer-skid.toml")
    result = closedform.derive(case)
    print(result.status, result.results.peak.to("mm"))

Importing the package is light: the names below are loaded on first use (PEP 562), so
``import closedform`` and ``from closedform import __version__`` bring in neither sympy
nor pint, numpy, mpmath or matplotlib.
"""

__version__ = "0.1.0"

# public name -> the module (relative to this package) that defines it
_LAZY = {
    "Case": ".case",
    "load_case": ".api",
    "load_case_text": ".case",
    "Derivation": ".derivation",
    "derive": ".derivation",
    "derive_many": ".api",
    "Extreme": ".quantity_results",
    "ResultQuantities": ".quantity_results",
    "unit_registry": ".quantity_results",
    "CaseError": ".errors",
    "ClosedformError": ".errors",
    "DerivationError": ".errors",
}

__all__ = ["Case", "CaseError", "ClosedformError", "Derivation", "DerivationError", "Extreme",
           "ResultQuantities", "__version__", "derive", "derive_many", "load_case",
           "load_case_text", "unit_registry"]


def __getattr__(name: str) -> object:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'closedform' has no attribute {name!r}")
    from importlib import import_module

    value = getattr(import_module(module, __name__), name)
    globals()[name] = value          # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))

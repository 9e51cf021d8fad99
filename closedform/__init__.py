"""closedform: exact piecewise responses of linear models to load histories, with checks.

Typical use::

    import closedform
    case = closedform.load_case("skid.toml")
    result = closedform.derive(case)
    print(result.status, result.results.peak)
"""

__version__ = "0.1.0"

from .case import Case, load_case, load_case_text  # noqa: E402
from .derivation import Derivation, derive  # noqa: E402
from .errors import CaseError, ClosedformError, DerivationError  # noqa: E402

__all__ = ["Case", "CaseError", "ClosedformError", "Derivation", "DerivationError",
           "__version__", "derive", "load_case", "load_case_text"]

"""limitcase: evidence that new exotic payoff code is right.

Products declare bounded parameters, dates, a vectorised payoff, their degenerate limits
and the relations that must hold; the reducer turns those into checks; the engine prices
them on common paths with standard errors; the verdict applies Holm's correction.
"""

from .ends import EndJump
from .engine import BLOCK, Estimate, evaluate, price
from .errors import DeclarationError, InputError, LimitcaseError, ModelError, NoReference, ParamError, PayoffError
from .models import BlackScholes, Heston, Merton, Model, MultiBlackScholes
from .params import Param
from .product import Cashflows, Observed, Product, running
from .reduce import Bound, Check, Convex, Identity, Monotone, Reduction, Relation, checks_for
from .suite import RunResult, run_checks
from .ties import Tie

__all__ = [
    "BLOCK",
    "Bound",
    "BlackScholes",
    "Cashflows",
    "Check",
    "Convex",
    "DeclarationError",
    "EndJump",
    "Estimate",
    "Heston",
    "Identity",
    "InputError",
    "LimitcaseError",
    "Merton",
    "Model",
    "ModelError",
    "Monotone",
    "MultiBlackScholes",
    "NoReference",
    "Observed",
    "Param",
    "ParamError",
    "PayoffError",
    "Product",
    "Reduction",
    "Relation",
    "RunResult",
    "checks_for",
    "Tie",
    "evaluate",
    "price",
    "run_checks",
    "running",
]

__version__ = "0.1.0"

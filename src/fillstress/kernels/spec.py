"""The choice of stress distribution, validated once: no compiled code here, so the
command line and the numpy paths can resolve a method without loading numba."""
from __future__ import annotations

import math
from dataclasses import dataclass

from ..errors import InputError

METHODS = ("boussinesq", "westergaard")


@dataclass(frozen=True)
class KernelSpec:
    """A validated choice of stress distribution.

    Attributes
    ----------
    method : str
        "boussinesq" or "westergaard".
    poisson : float or None
        Poisson's ratio (Westergaard only).
    depth_scale : float
        c / z in the shared corner form: 1 for Boussinesq, η for Westergaard.
    second_term : float
        1.0 when the Boussinesq abz/R term is present, else 0.0.
    """

    method: str
    poisson: float | None
    depth_scale: float
    second_term: float


def resolve_method(method="boussinesq", poisson=None) -> KernelSpec:
    """Validate a method name and Poisson's ratio; raise InputError naming the argument.

    Examples
    --------
    >>> resolve_method("westergaard").poisson
    0.0
    >>> resolve_method("boussinesq", 0.3)
    Traceback (most recent call last):
    ...
    fillstress.errors.InputError: argument poisson: applies only to method='westergaard', got 0.3 with method='boussinesq'
    """
    if not isinstance(method, str) or method.strip().lower() not in METHODS:
        raise InputError(f"must be one of {', '.join(METHODS)}; got {method!r}", argument="method")
    method = method.strip().lower()
    if method == "boussinesq":
        if poisson is not None:
            raise InputError(f"applies only to method='westergaard', got {poisson!r} "
                             "with method='boussinesq'", argument="poisson")
        return KernelSpec("boussinesq", None, 1.0, 1.0)
    nu = 0.0 if poisson is None else poisson
    try:
        nu = float(nu)
    except (TypeError, ValueError):
        raise InputError(f"must be a number, got {poisson!r}", argument="poisson") from None
    if not (0.0 <= nu < 0.5):  # also refuses NaN
        raise InputError(f"must satisfy 0 <= poisson < 0.5 for Westergaard, got {poisson!r}",
                         argument="poisson")
    return KernelSpec("westergaard", nu, eta(nu), 0.0)


def eta(poisson: float) -> float:
    """Westergaard's η = sqrt((1 − 2ν)/(2 − 2ν)) for 0 <= ν < 0.5 (not validated here).

    Examples
    --------
    >>> round(eta(0.0) ** 2, 12)
    0.5
    """
    return math.sqrt((1.0 - 2.0 * poisson) / (2.0 - 2.0 * poisson))

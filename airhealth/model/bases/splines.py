"""Natural cubic spline bases, built the way base R's ``splines::ns`` builds them.

A natural cubic spline is cubic between knots and linear beyond the boundary knots. With ``df`` degrees of
freedom and no intercept, ``df - 1`` interior knots sit at equally spaced quantiles of the non-missing
values and the boundary knots at their range. The basis is the cubic B-spline basis on those knots,
projected onto the null space of the second-derivative constraints at the two boundary knots (a QR
decomposition of the constraint matrix), then with the first column dropped when there is no intercept.

References
----------
Hastie T, Tibshirani R, Friedman J (2009). The Elements of Statistical Learning, 2nd ed., section 5.2.1
(natural cubic splines). de Boor C (2001). A Practical Guide to Splines, revised ed. Springer.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.interpolate import BSpline

from ...errors import SpecificationError

__all__ = ["NaturalSplineBasis"]

_ORDER = 4  # cubic


@dataclass(frozen=True)
class NaturalSplineBasis:
    """A natural cubic spline basis with fixed knots; evaluate it at any values.

    Parameters
    ----------
    interior_knots : tuple of float
        Interior knots, increasing.
    boundary_knots : tuple of float
        Lower and upper boundary knots; the basis is linear outside them.
    intercept : bool
        Keep the column that, with the others, spans the constant (default False, as in a model that
        already has an intercept).

    Examples
    --------
    >>> import numpy as np
    >>> basis = NaturalSplineBasis.from_values(np.arange(100.0), df=4)
    >>> basis.evaluate(np.array([0.0, 50.0, 99.0])).shape
    (3, 4)
    """

    interior_knots: tuple[float, ...]
    boundary_knots: tuple[float, float]
    intercept: bool = False

    def __post_init__(self) -> None:
        lo, hi = self.boundary_knots
        if not np.isfinite([lo, hi]).all() or not lo < hi:
            raise SpecificationError(f"spline boundary knots must be finite with lower < upper, got {lo}, {hi}.")
        knots = np.asarray(self.interior_knots, dtype=float)
        if knots.size and ((knots <= lo).any() or (knots >= hi).any() or (np.diff(knots) < 0).any()):
            raise SpecificationError(
                "interior knots must be increasing and strictly inside the boundary knots "
                f"({lo:g}, {hi:g}); got {', '.join(f'{k:g}' for k in knots)}."
            )

    @classmethod
    def from_values(
        cls,
        values: np.ndarray,
        df: int | None = None,
        knots: np.ndarray | None = None,
        intercept: bool = False,
        boundary_knots: tuple[float, float] | None = None,
    ) -> NaturalSplineBasis:
        """Place knots from data: ``df - 1 - intercept`` interior knots at equally spaced quantiles.

        Missing values are ignored, as in ``splines::ns``. Either ``df`` or ``knots`` must be given.
        """
        x = np.asarray(values, dtype=float)
        x = x[np.isfinite(x)]
        if x.size < 2 or x.min() == x.max():
            raise SpecificationError("a spline needs at least two distinct non-missing values.")
        lo, hi = boundary_knots if boundary_knots is not None else (float(x.min()), float(x.max()))
        if knots is None:
            if df is None:
                raise SpecificationError("give a spline either df or knots.")
            n_interior = int(df) - 1 - int(intercept)
            if n_interior < 0:
                raise SpecificationError(f"spline df must be at least {1 + int(intercept)}, got {df}.")
            inside = x[(x >= lo) & (x <= hi)]
            probs = np.linspace(0.0, 1.0, n_interior + 2)[1:-1]
            knots = np.quantile(inside, probs) if n_interior else np.empty(0)
        return cls(tuple(float(k) for k in np.asarray(knots, dtype=float)), (float(lo), float(hi)), intercept)

    @property
    def df(self) -> int:
        """Number of basis columns."""
        return len(self.interior_knots) + 1 + int(self.intercept)

    def _knot_vector(self) -> np.ndarray:
        lo, hi = self.boundary_knots
        return np.r_[[lo] * _ORDER, self.interior_knots, [hi] * _ORDER]

    def _projection(self) -> np.ndarray:
        """Matrix mapping B-spline columns to natural-spline columns (cached per instance)."""
        cached = self.__dict__.get("_proj")
        if cached is not None:
            return cached
        t = self._knot_vector()
        n_basis = len(t) - _ORDER
        second = BSpline(t, np.eye(n_basis), _ORDER - 1).derivative(2)
        const = second(np.asarray(self.boundary_knots))  # 2 × n_basis
        if not self.intercept:
            const = const[:, 1:]
        q, _ = np.linalg.qr(const.T, mode="complete")
        proj = q[:, 2:]
        if not self.intercept:
            proj = np.vstack([np.zeros((1, proj.shape[1])), proj])
        object.__setattr__(self, "_proj", proj)
        return proj

    def evaluate(self, values: np.ndarray) -> np.ndarray:
        """Basis columns at ``values``; rows are missing where values are missing; linear beyond the boundary."""
        x = np.asarray(values, dtype=float).ravel()
        lo, hi = self.boundary_knots
        t = self._knot_vector()
        proj = self._projection()
        finite = np.isfinite(x)
        inside = finite & (x >= lo) & (x <= hi)
        if inside.all():
            return np.asarray(BSpline.design_matrix(x, t, _ORDER - 1) @ proj)
        out = np.full((x.size, self.df), np.nan)
        if inside.any():
            out[inside] = BSpline.design_matrix(x[inside], t, _ORDER - 1) @ proj
        for side, mask in ((lo, finite & (x < lo)), (hi, finite & (x > hi))):
            if mask.any():
                spline = BSpline(t, proj, _ORDER - 1)
                value, slope = spline(side), spline.derivative(1)(side)
                out[mask] = value + np.outer(x[mask] - side, slope)
        return out

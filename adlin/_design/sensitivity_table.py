"""Sensitivities: derivatives of chosen quantities with respect to parameters."""

from __future__ import annotations

import math

import equinox as eqx
import numpy as np
from jaxtyping import Array, Inexact

from .._errors import AnalysisError, ParameterError, did_you_mean
from .._units import si


def _fmt(v: complex | float, unit: str = "") -> str:
    v = complex(v)
    if v.imag == 0:
        return si(v.real, unit)
    sign = "+" if v.imag >= 0 else "-"
    return f"{v.real:.4g} {sign} j{abs(v.imag):.4g}" + (f" {unit}" if unit else "")


class Sensitivities(eqx.Module):
    """Exact derivatives of quantities with respect to parameters, through the
    steady state.

    - `quantities`: labels of the q quantities (rows).
    - `units`: their units.
    - `parameters`: names of the k parameters (or inputs) differentiated
      against (columns).
    - `parameter_values`: their values at the nominal point, shape (k,).
    - `values`: the quantities at the nominal point, shape (q,).
    - `derivatives`: dy/dp, shape (q, k), in the quantities' units per
      parameter unit.
    - `normalized`: (p / y) dy/dp, shape (q, k), dimensionless: the relative
      change of y per relative change of p (1 % change in p moves y by about
      `normalized` %).  For a complex pole s it is (p / s) ds/dp, whose real
      part is the relative change of the pole's magnitude |s| and whose
      imaginary part is the change of its angle arg(s) in radians, both per
      relative change of p.  NaN where y = 0 (see `notes`).
    - `notes`: what could not be computed and why (e.g. poles that nearly
      coincide, whose individual derivatives do not exist; NaN in their rows).

    Arrays are float64 when every quantity is real, complex128 when one is a
    pole.  `derivative(q, p)`, `normalized_sensitivity(q, p)`,
    `ranked(q)` (rows sorted by |normalized|), `table()` (rows for reports)
    and `lines()` (readable text).
    """

    parameter_values: Inexact[Array, " k"]
    values: Inexact[Array, " q"]
    derivatives: Inexact[Array, "q k"]
    normalized: Inexact[Array, "q k"]
    quantities: tuple[str, ...] = eqx.field(static=True)
    units: tuple[str, ...] = eqx.field(static=True)
    parameters: tuple[str, ...] = eqx.field(static=True)
    notes: tuple[str, ...] = eqx.field(static=True, default=())

    def _q(self, quantity: str) -> int:
        if quantity not in self.quantities:
            raise ParameterError(f"no quantity {quantity!r} in these sensitivities: "
                                 f"{did_you_mean(quantity, self.quantities)}.")
        return self.quantities.index(quantity)

    def _p(self, parameter: str) -> int:
        if parameter not in self.parameters:
            raise ParameterError(f"no parameter {parameter!r} in these sensitivities: "
                                 f"{did_you_mean(parameter, self.parameters)}.")
        return self.parameters.index(parameter)

    def _scalar(self, array, quantity: str, parameter: str):
        v = complex(np.asarray(array)[self._q(quantity), self._p(parameter)])
        return v if np.iscomplexobj(np.asarray(array)) else v.real

    def derivative(self, quantity: str, parameter: str) -> float | complex:
        """dy/dp for one quantity (by label) and one parameter (by name)."""
        return self._scalar(self.derivatives, quantity, parameter)

    def normalized_sensitivity(self, quantity: str, parameter: str) -> float | complex:
        """(p / y) dy/dp for one quantity and one parameter."""
        return self._scalar(self.normalized, quantity, parameter)

    def ranked(self, quantity: str, top: int | None = None) -> list[dict]:
        """The parameters that move `quantity` most, largest |normalized| first.

        **Arguments:**

        - `quantity`: a label from `quantities`.
        - `top`: keep only the first `top` rows.

        **Returns:** rows ``{"parameter", "parameter_value", "derivative",
        "normalized"}``; a row whose normalized sensitivity is NaN comes last.

        **Raises:** `ParameterError` for an unknown label.
        """
        q = self._q(quantity)
        d = np.asarray(self.derivatives)[q]
        s = np.asarray(self.normalized)[q]
        mag = np.abs(s)
        # NaN last, then largest first; ties keep the parameter order (stable sort)
        order = np.argsort(np.where(np.isnan(mag), np.inf, -mag), kind="stable")
        cast = complex if np.iscomplexobj(s) else float
        rows = [{"parameter": self.parameters[j],
                 "parameter_value": float(np.asarray(self.parameter_values)[j]),
                 "derivative": cast(d[j]), "normalized": cast(s[j])} for j in order]
        return rows if top is None else rows[:top]

    def table(self) -> list[dict]:
        """One plain row per (quantity, parameter), quantities in order, each
        ranked by |normalized| (``rank`` 1 = the largest).

        Row keys: ``quantity``, ``unit``, ``value``, ``rank``, ``parameter``,
        ``parameter_value``, ``derivative``, ``normalized``.
        """
        vals = np.asarray(self.values)
        cast = complex if np.iscomplexobj(vals) else float
        rows = []
        for qi, (name, unit) in enumerate(zip(self.quantities, self.units, strict=True)):
            for rank, row in enumerate(self.ranked(name), start=1):
                rows.append({"quantity": name, "unit": unit, "value": cast(vals[qi]),
                             "rank": rank, **row})
        return rows

    def lines(self, top: int = 5) -> list[str]:
        """Readable text: each quantity with its `top` most influential parameters."""
        out = []
        vals = np.asarray(self.values)
        w = max([16, *(len(p) for p in self.parameters)])
        for qi, (name, unit) in enumerate(zip(self.quantities, self.units, strict=True)):
            out.append(f"{name} = {_fmt(vals[qi], unit)}")
            out.append(f"    {'parameter':<{w}} {'value':>12} {'(p/y) dy/dp':>22} {'dy/dp':>26}")
            for row in self.ranked(name, top):
                out.append(f"    {row['parameter']:<{w}} {si(row['parameter_value']):>12} "
                           f"{_fmt(row['normalized']):>22} {_fmt(row['derivative']):>26}")
        out.extend(f"note: {n}" for n in self.notes)
        return out

    def __str__(self) -> str:
        return "\n".join(self.lines())

    def check(self, quantity: str) -> None:
        """Raise `AnalysisError` when `quantity`'s derivatives are NaN, quoting the note."""
        q = self._q(quantity)
        if np.isnan(np.asarray(self.derivatives)[q]).any():
            why = [n for n in self.notes if quantity in n]
            raise AnalysisError(f"derivatives of {quantity!r} are not available: "
                                + ("; ".join(why) if why else "non-finite values") + ".")


def normalize_rows(values: np.ndarray, derivatives: np.ndarray,
                   parameter_values: np.ndarray) -> np.ndarray:
    """(p / y) dy/dp, NaN where y = 0."""
    y = values[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        s = parameter_values[None, :] * derivatives / np.where(y == 0, np.nan, y)
    return s


def coalescing(poles: np.ndarray, target: complex, rtol: float) -> tuple[bool, float]:
    """Whether `target` (one of `poles`) nearly coincides with another pole.

    **Returns:** (flag, separation relative to |target|).
    """
    poles = np.asarray(poles, dtype=complex)
    k = int(np.argmin(np.abs(poles - target)))
    others = np.delete(poles, k)
    if others.size == 0:
        return False, math.inf
    sep = float(np.min(np.abs(others - poles[k]))) / max(abs(poles[k]), np.finfo(float).tiny)
    return sep < rtol, sep

"""Small-signal parameters of the devices of a circuit at a bias point.

Each quantity is a derivative of the device law itself, taken with
``jax.jacfwd`` at the terminal voltages of the bias point, so it is exact and
differentiable in the parameters.  Names follow the hybrid-pi model (Sedra &
Smith, Microelectronic Circuits, 7th ed., secs. 4.3 (diode), 7.2 (BJT and
MOSFET small-signal models)).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np

from .._errors import ModelError
from .assembly import Assembly, Bias

Quantities = dict[str, tuple[Any, str]]


class SmallSignal(eqx.Module):
    """Small-signal parameters per device: ``table["Q1"]["g_m"]``.

    A pytree (values are JAX scalars), so it passes through `jax.jit` and
    `jax.grad`.  `units` gives the unit of each quantity ("A", "S", "F", "").
    """

    values: dict[str, dict[str, Any]]
    unit_items: tuple[tuple[str, tuple[tuple[str, str], ...]], ...] = eqx.field(static=True)

    # jax rebuilds dicts with sorted keys; unit_items keeps the reading order.
    def __getitem__(self, element: str) -> dict[str, Any]:
        values = self.values[element]
        return {q: values[q] for q, _ in dict(self.unit_items)[element]}

    def __iter__(self):
        return iter(self.keys())

    def __len__(self) -> int:
        return len(self.values)

    def __contains__(self, element: object) -> bool:
        return element in self.values

    def keys(self) -> list[str]:
        return [name for name, _ in self.unit_items]

    def items(self) -> list[tuple[str, dict[str, Any]]]:
        return [(name, self[name]) for name in self.keys()]

    @property
    def units(self) -> dict[str, dict[str, str]]:
        return {name: dict(items) for name, items in self.unit_items}

    def __str__(self) -> str:
        units = self.units
        lines = []
        for name, quantities in self.items():
            lines.append(f"{name}:")
            for q, value in quantities.items():
                try:
                    text = f"{float(np.asarray(value)) + 0.0:.6g}"  # no "-0"
                except TypeError:  # a tracer
                    text = repr(value)
                lines.append(f"  {q:<10} {text} {units[name][q]}".rstrip())
        return "\n".join(lines)


def make_table(per_element: Mapping[str, Quantities]) -> SmallSignal:
    values = {name: {q: v for q, (v, _) in qs.items()} for name, qs in per_element.items()}
    units = tuple(
        (name, tuple((q, u) for q, (_, u) in qs.items())) for name, qs in per_element.items()
    )
    return SmallSignal(values=values, unit_items=units)


def generic_summary(terminals: Sequence[str], i, g, q, c) -> Quantities:
    """Currents ``i[t]``, conductances ``g[t,s] = dI_t/dV_s`` and, with charges,
    capacitances ``c[t,s] = dQ_t/dV_s`` (nodal form: an off-diagonal entry is
    minus the capacitance between the two terminals)."""
    out: Quantities = {f"i[{t}]": (i[k], "A") for k, t in enumerate(terminals)}
    for k, t in enumerate(terminals):
        for m, s in enumerate(terminals):
            out[f"g[{t},{s}]"] = (g[k, m], "S")
    if c is not None:
        for k, t in enumerate(terminals):
            for m, s in enumerate(terminals):
                out[f"c[{t},{s}]"] = (c[k, m], "F")
    return out


def bjt_summary(terminals: Sequence[str], i, g, q, c) -> Quantities:
    """Hybrid-pi parameters of a BJT with terminals (c, b, e).

    ``g_m = dI_C/dV_BE`` and ``g_pi = dI_B/dV_BE`` at fixed V_CE (move v_b only),
    ``g_o = dI_C/dV_CE`` at fixed V_BE (move v_c only), ``beta = g_m / g_pi``
    (small-signal current gain), ``beta_dc = I_C / I_B``.  With charges,
    ``c_be`` and ``c_bc`` are the capacitances between base and emitter and
    base and collector.  Currents are into the device (negative I_C for an
    on pnp); conductances are positive for both polarities.
    """
    ic, ib, ie = (terminals.index(t) for t in ("c", "b", "e"))
    out: Quantities = {
        "i_c": (i[ic], "A"),
        "i_b": (i[ib], "A"),
        "g_m": (g[ic, ib], "S"),
        "g_pi": (g[ib, ib], "S"),
        "g_o": (g[ic, ic], "S"),
        "beta": (g[ic, ib] / g[ib, ib], ""),
        "beta_dc": (i[ic] / i[ib], ""),
    }
    if c is not None:
        out["c_be"] = (-c[ib, ie], "F")
        out["c_bc"] = (-c[ib, ic], "F")
    return out


def mosfet_summary(terminals: Sequence[str], i, g, q, c) -> Quantities:
    """Small-signal parameters of a MOSFET with terminals (d, g, s, b).

    ``g_m = dI_D/dV_GS``, ``g_ds = dI_D/dV_DS``, ``g_mb = dI_D/dV_BS``, each with
    the other terminal voltages held (the source is the reference).  With
    charges, ``c_gs``, ``c_gd`` and ``c_gb`` are the capacitances from the gate
    to the other terminals.
    """
    d, gt, s, b = (terminals.index(t) for t in ("d", "g", "s", "b"))
    out: Quantities = {
        "i_d": (i[d], "A"),
        "g_m": (g[d, gt], "S"),
        "g_ds": (g[d, d], "S"),
        "g_mb": (g[d, b], "S"),
    }
    if c is not None:
        out["c_gs"] = (-c[gt, s], "F")
        out["c_gd"] = (-c[gt, d], "F")
        out["c_gb"] = (-c[gt, b], "F")
    return out


def small_signal_table(assembly: Assembly, x, p) -> SmallSignal:
    """The table of every element that has small-signal quantities, at x."""
    at = Bias(assembly.layout, x, None, p)
    rows = {}
    for element in assembly.elements:
        quantities = element.small_signal(at)
        if quantities is not None:
            rows[element.name] = quantities
    return make_table(rows)


def bias_vector(op: Any, unknowns: tuple[str, ...]):
    """x from an operating point, a dict by unknown name, or x itself."""
    if isinstance(op, (np.ndarray, jax.Array)):
        if op.shape != (len(unknowns),):
            raise ModelError(
                f"a bias vector must have shape ({len(unknowns)},) for the "
                f"unknowns {list(unknowns)}, got {op.shape}."
            )
        return jnp.asarray(op)
    values, missing = [], []
    for name in unknowns:
        try:
            values.append(op[name])
        except (KeyError, IndexError, TypeError):
            missing.append(name)
    if missing:
        raise ModelError(
            f"the operating point has no value for unknown(s) {missing}; give "
            "every unknown of the circuit by name."
        )
    try:  # concrete numbers: one transfer, no compilation
        return jax.device_put(np.asarray(values, dtype=np.float64))
    except (jax.errors.TracerArrayConversionError, jax.errors.ConcretizationTypeError):
        return jnp.stack([jnp.asarray(v, dtype=jnp.float64) for v in values])

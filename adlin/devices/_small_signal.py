"""Small-signal parameters of the device laws, by forward-mode differentiation.

Each helper evaluates a law and its Jacobian with respect to terminal
voltages at one bias point (``jax.jacfwd``, so the numbers are exact
derivatives of the law, not finite differences) and names the entries the
way the textbook hybrid-pi and MOS small-signal models do. They are pure
JAX, compiled with ``jax.jit`` on first use (a first eager evaluation would
otherwise compile every primitive separately, which takes seconds), and work
inside ``jax.jit``, ``jax.vmap`` and ``jax.grad`` of the caller. `law` and
`polarity` are static (Python values), so a wrong polarity is still caught.
"""

from __future__ import annotations

import difflib
import functools
import inspect
from collections.abc import Callable
from typing import Any

import jax
import jax.numpy as jnp
from jax import Array
from jax.typing import ArrayLike

from .bjt import bjt_charges, bjt_currents
from .diode import diode_charge, diode_current
from .mosfet import ekv_currents, mosfet_charges, square_law_currents

_MOSFET_LAWS = {"ekv": ekv_currents, "square": square_law_currents}


def _keywords(fn: Callable) -> set[str]:
    return {
        name
        for name, par in inspect.signature(fn).parameters.items()
        if par.kind is inspect.Parameter.KEYWORD_ONLY
    }


def _split(params: dict[str, Any], *fns: Callable) -> list[dict[str, Any]]:
    # One parameter dict serves several laws: hand each law the names it
    # takes, and reject names that no law takes (a misspelt parameter would
    # otherwise silently keep its default).
    names = [_keywords(fn) for fn in fns]
    known = set().union(*names)
    unknown = sorted(set(params) - known)
    if unknown:
        hints = []
        for name in unknown:
            close = difflib.get_close_matches(name, sorted(known), n=1)
            hints.append(f"{name!r}" + (f" (did you mean {close[0]!r}?)" if close else ""))
        raise TypeError(
            f"unknown device parameter(s) {', '.join(hints)}; accepted: {', '.join(sorted(known))}."
        )
    return [{k: v for k, v in params.items() if k in n} for n in names]


def _float(x: ArrayLike) -> Array:
    return jnp.asarray(x, dtype=jnp.result_type(float))


def _neg(x: Array) -> Array:
    # 0 - x rather than -x: a zero capacitance reads as 0.0, not -0.0, in reports.
    return 0.0 - x


def _value_and_jacobian(fn: Callable, *args: Array) -> tuple[Array, Array]:
    # fn returns a tuple of k terminal quantities; the Jacobian is (k, len(args)).
    def stacked(*a):
        return jnp.stack(fn(*a))

    value = stacked(*args)
    cols = jax.jacfwd(stacked, argnums=tuple(range(len(args))))(*args)
    return value, jnp.stack(cols, axis=-1)


@jax.jit
def diode_small_signal(v: ArrayLike, **params: Any) -> dict[str, Array]:
    """Small-signal conductance and capacitance of a junction diode at bias `v`.

    ``g_d = di/dv`` (``~ i / (n V_T)`` in forward bias) and ``c_d = dq/dv``
    (depletion plus diffusion capacitance ``tau_T g_d``); Sedra & Smith,
    Microelectronic Circuits, 7th ed., 2015, sec. 4.3 (small-signal model)
    and sec. 3.6 (junction capacitances; from memory).

    **Arguments:**

    - `v`: anode-to-cathode bias voltage in volts.
    - `**params`: keyword parameters of `diode_current` and `diode_charge`.

    **Returns:**

    A dict with `i_d` (A), `g_d` (S) and `c_d` (F).

    **Raises:**

    `TypeError` for a parameter name that neither law accepts.
    """
    (current_params, charge_params) = _split(params, diode_current, diode_charge)
    v = _float(v)
    i_d, g_d = jax.jvp(lambda x: diode_current(x, **current_params), (v,), (jnp.ones_like(v),))
    c_d = jax.jacfwd(lambda x: diode_charge(x, **charge_params))(v)
    return {"i_d": i_d, "g_d": g_d, "c_d": c_d}


@functools.partial(jax.jit, static_argnames=("polarity",))
def bjt_small_signal(
    v_c: ArrayLike, v_b: ArrayLike, v_e: ArrayLike, **params: Any
) -> dict[str, Array]:
    """Hybrid-pi parameters of a bipolar transistor at the given terminal potentials.

    With the emitter as reference and ``v_be``, ``v_ce`` as the controlling
    voltages (Gray, Hurst, Lewis & Meyer, Analysis and Design of Analog
    Integrated Circuits, 5th ed., 2009, sec. 1.4, hybrid-pi model; from
    memory):

    - `g_m` = ``di_c/dv_be`` (``~ I_C / V_T``), `g_pi` = ``di_b/dv_be``,
      `g_o` = ``di_c/dv_ce`` (``~ I_C / V_A``), `g_mu` = ``-di_b/dv_ce``;
    - `beta_ac` = ``g_m / g_pi``, `beta_dc` = ``i_c / i_b``;
    - `c_be` = ``-dq_e/dv_be`` at fixed ``v_bc`` (``C_pi``) and `c_bc` =
      ``-dq_c/dv_bc`` at fixed ``v_be`` (``C_mu``), from `bjt_charges`
      (zero unless capacitances or transit times are given).

    For a pnp device (``polarity=-1``) the same definitions give positive
    conductances and capacitances.

    **Arguments:**

    - `v_c`, `v_b`, `v_e`: collector, base and emitter potentials in volts.
    - `**params`: keyword parameters of `bjt_currents` and `bjt_charges`.

    **Returns:**

    A dict with `i_c`, `i_b` (A, into the device), `g_m`, `g_pi`, `g_o`,
    `g_mu` (S), `beta_ac`, `beta_dc` (dimensionless), `c_be`, `c_bc` (F).

    **Raises:**

    `TypeError` for a parameter name that neither law accepts.
    """
    (current_params, charge_params) = _split(params, bjt_currents, bjt_charges)
    v_c, v_b, v_e = _float(v_c), _float(v_b), _float(v_e)

    def currents(v_be, v_ce):
        return bjt_currents(v_e + v_ce, v_e + v_be, v_e, **current_params)

    def charges(v_be, v_bc):
        return bjt_charges(v_e + v_be - v_bc, v_e + v_be, v_e, **charge_params)

    (i_c, i_b, _), g = _value_and_jacobian(currents, v_b - v_e, v_c - v_e)
    _, c = _value_and_jacobian(charges, v_b - v_e, v_b - v_c)
    g_m, g_pi, g_o = g[0, 0], g[1, 0], g[0, 1]
    return {
        "i_c": i_c,
        "i_b": i_b,
        "g_m": g_m,
        "g_pi": g_pi,
        "g_o": g_o,
        "g_mu": _neg(g[1, 1]),
        "beta_ac": g_m / g_pi,
        "beta_dc": i_c / i_b,
        "c_be": _neg(c[2, 0]),
        "c_bc": _neg(c[0, 1]),
    }


@functools.partial(jax.jit, static_argnames=("law", "polarity"))
def mosfet_small_signal(
    v_d: ArrayLike,
    v_g: ArrayLike,
    v_s: ArrayLike,
    v_b: ArrayLike,
    law: str = "ekv",
    **params: Any,
) -> dict[str, Array]:
    """Small-signal parameters of a MOSFET at the given terminal potentials.

    With the source as reference (Sedra & Smith, Microelectronic Circuits,
    7th ed., 2015, sec. 7.2, small-signal model with body effect; Tsividis,
    Operation and Modeling of the MOS Transistor, 2nd ed., 1999, ch. 8-9,
    capacitance matrix ``C_ij = -dq_i/dv_j``; both from memory):

    - `g_m` = ``di_d/dv_gs``, `g_ds` = ``di_d/dv_ds``, `g_mb` = ``di_d/dv_bs``;
    - `c_gs` = ``-dq_g/dv_s``, `c_gd` = ``-dq_g/dv_d``, `c_gb` = ``-dq_g/dv_b``,
      `c_db` = ``-dq_d/dv_b``, `c_sb` = ``-dq_s/dv_b`` from `mosfet_charges`.

    **Arguments:**

    - `v_d`, `v_g`, `v_s`, `v_b`: drain, gate, source and bulk potentials in volts.
    - `law`: ``"ekv"`` (`ekv_currents`) or ``"square"`` (`square_law_currents`);
      a Python string (static under ``jax.jit``).
    - `**params`: keyword parameters of the chosen current law and of
      `mosfet_charges`.

    **Returns:**

    A dict with `i_d` (A, into the drain), `g_m`, `g_ds`, `g_mb` (S) and
    `c_gs`, `c_gd`, `c_gb`, `c_db`, `c_sb` (F).

    **Raises:**

    `ValueError` for an unknown `law`; `TypeError` for a parameter name that
    neither the current law nor the charge law accepts.
    """
    if law not in _MOSFET_LAWS:
        raise ValueError(f"unknown MOSFET law {law!r}; choose one of {sorted(_MOSFET_LAWS)}.")
    current_law = _MOSFET_LAWS[law]
    (current_params, charge_params) = _split(params, current_law, mosfet_charges)
    v_d, v_g, v_s, v_b = _float(v_d), _float(v_g), _float(v_s), _float(v_b)

    def currents(v_gs, v_ds, v_bs):
        return current_law(v_s + v_ds, v_s + v_gs, v_s, v_s + v_bs, **current_params)

    (i_d, *_), g = _value_and_jacobian(currents, v_g - v_s, v_d - v_s, v_b - v_s)
    _, c = _value_and_jacobian(lambda *v: mosfet_charges(*v, **charge_params), v_d, v_g, v_s, v_b)
    d, gate, s, b = 0, 1, 2, 3
    return {
        "i_d": i_d,
        "g_m": g[0, 0],
        "g_ds": g[0, 1],
        "g_mb": g[0, 2],
        "c_gs": _neg(c[gate, s]),
        "c_gd": _neg(c[gate, d]),
        "c_gb": _neg(c[gate, b]),
        "c_db": _neg(c[d, b]),
        "c_sb": _neg(c[s, b]),
    }

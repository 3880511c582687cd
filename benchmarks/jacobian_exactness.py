"""Exactness of adlin's Jacobians against a sympy-exact reference.

For the demo circuit (`adlin.scenarios.sensor_ldo`) at its operating point,
the static Jacobian df/dx and the storage Jacobian dq/dx that adlin uses
(`adlin.compile(system).matrices`, i.e. `jax.jacfwd`) are compared with a
reference that does not use JAX's automatic differentiation: the jaxpr of
f and q is rebuilt as sympy expressions in the unknowns
(`benchmarks/jaxpr_to_sympy.py`; inputs and parameters enter as constants),
differentiated with `sympy.diff` and evaluated with mpmath at 50 digits.
Central finite differences (step eps^(1/3) * max(|x_j|, 1)) are measured the
same way for comparison.  Two small extra models give context.

Measures, over the entries of each matrix:
- entrywise: max |J - J_exact| / |J_exact| over the entries where J_exact != 0;
- normwise:  max over rows of  max_j |J - J_exact|_ij / max_j |J_exact|_ij;
- spurious:  entries where J_exact == 0 but J != 0.

Target (from the issue): adlin's max relative error <= 1e-13.

    python benchmarks/jacobian_exactness.py
"""

from __future__ import annotations

import os
import sys
import time

import jax
import jax.numpy as jnp
import numpy as np

import adlin

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from jaxpr_to_sympy import interpret, to_float  # noqa: E402

TARGET = 1e-13


# -- measures -------------------------------------------------------------------


def errors(J: np.ndarray, J_exact: np.ndarray) -> dict:
    J, X = np.asarray(J, dtype=np.float64), np.asarray(J_exact, dtype=np.float64)
    diff = np.abs(J - X)
    nz = X != 0
    entry = float(np.max(diff[nz] / np.abs(X[nz]))) if nz.any() else 0.0
    row_scale = np.max(np.abs(X), axis=1)
    rows = row_scale > 0
    norm = float(np.max(np.max(diff[rows], axis=1) / row_scale[rows])) if rows.any() else 0.0
    spurious = (~nz) & (J != 0)
    return dict(entries=int(nz.sum()), entry=entry, norm=norm, spurious=int(spurious.sum()),
                spurious_max=float(np.max(np.abs(J[spurious]))) if spurious.any() else 0.0)


def central_fd(fun, x: np.ndarray) -> np.ndarray:
    """Central differences, step eps^(1/3) * max(|x_j|, 1) (rounded to a representable step)."""
    fun = jax.jit(fun)
    x = np.asarray(x, dtype=np.float64)
    eps = np.finfo(np.float64).eps
    cols = []
    for j in range(x.size):
        h = eps ** (1 / 3) * max(abs(x[j]), 1.0)
        xp, xm = x.copy(), x.copy()
        xp[j] += h
        xm[j] -= h
        fp, fm = np.asarray(fun(jnp.asarray(xp))), np.asarray(fun(jnp.asarray(xm)))
        cols.append((fp - fm) / (xp[j] - xm[j]))
    return np.stack(cols, axis=1)


# -- one model ------------------------------------------------------------------


def measure(label: str, system: adlin.System) -> list[dict]:
    t0 = time.perf_counter()
    op = adlin.steady_state(system)
    t_op = time.perf_counter() - t0
    x, u, p = np.asarray(op.x), np.asarray(op.u), np.asarray(op.p)
    E, A, _, _, _ = adlin.compile(system).matrices(op.x, op.u, op.p)
    adlin_jac = {"df/dx": -np.asarray(A), "dq/dx": np.asarray(E)}
    fd_jac = {"df/dx": central_fd(lambda xx: system.f(xx, op.u, op.p), x),
              "dq/dx": central_fd(lambda xx: system.q(xx, op.p), x)}

    print(f"\n== {label}: {system.n} unknowns, operating point converged={bool(op.converged)} "
          f"({int(op.iterations)} Newton iterations; adlin.steady_state incl. compilation "
          f"{t_op:.1f} s)")
    rows = []
    for what, fun, args in (("df/dx", system.f, (u, p)), ("dq/dx", system.q, (p,))):
        n_eqns = len(jax.make_jaxpr(fun)(x, *args).jaxpr.eqns)
        interp = interpret(fun, x, *args, names=system.unknowns)
        t0 = time.perf_counter()
        J_exact = to_float(interp.jacobian())
        t_diff = time.perf_counter() - t0
        value = np.asarray(fun(x, *args))
        value_gap = float(np.max(np.abs(to_float(interp.values()) - value)))
        print(f"  {what}: jaxpr of {n_eqns} top-level equations ({sum(interp.primitives.values())} "
              f"incl. nested calls, {len(interp.primitives)} primitive kinds) interpreted in "
              f"{interp.seconds:.2f} s; sympy.diff + 50-digit evaluation {t_diff:.2f} s")
        fn = what[1]
        print(f"         value check at x*: max |{fn}(sympy) - {fn}(jax)| = {value_gap:.1e}"
              f" (max |{fn}| = {np.max(np.abs(value)):.1e}); branch ties: "
              + (f"{interp.ties}" if interp.ties else "none"))
        for method, J in (("adlin (jax.jacfwd)", adlin_jac[what]), ("central FD", fd_jac[what])):
            rows.append(dict(model=label, matrix=what, method=method, **errors(J, J_exact)))
    return rows


def diode_resistor() -> adlin.System:
    """Resistor from a source into a diode written directly with jnp.exp."""
    vt = adlin.devices.thermal_voltage(300.15)

    def current(x, u, p):
        v = x[0]
        return jnp.stack([(v - u[0]) / p["R"] + p["Is"] * (jnp.exp(v / (p["n"] * vt)) - 1.0)])

    def charge(x, p):
        return jnp.stack([p["C"] * x[0] + p["tt"] * p["Is"] * jnp.exp(x[0] / (p["n"] * vt))])

    return adlin.System(current, charge, unknowns=("v_a",), inputs={"v_s": 5.0},
                        params={"R": 1e3, "Is": 1e-14, "n": 1.0, "C": 1e-9, "tt": 1e-9},
                        name="diode_resistor")


def photodiode_bias() -> adlin.System:
    c = adlin.Circuit("photodiode_bias")
    c.input("v_supply", 3.3)
    c.voltage_source("VB", "bias", "gnd", "v_supply")
    c.resistor("R1", "bias", "a", 10e3)
    c.diode("D1", "a", "gnd", saturation_current=1e-14, zero_bias_capacitance=2e-12,
            transit_time=1e-9)
    c.capacitor("C1", "a", "gnd", 10e-12)
    return c.build()


def main() -> None:
    from adlin.scenarios import sensor_ldo

    eps = np.finfo(np.float64).eps
    print(f"jax {jax.__version__}, float64 eps = {eps:.3e}; central-difference step "
          f"eps^(1/3)*max(|x_j|,1) = {eps ** (1 / 3):.2e}*max(|x_j|,1)")
    rows = measure("sensor_ldo (demo)", sensor_ldo().build())
    rows += measure("diode_resistor (System, jnp.exp)", diode_resistor())
    rows += measure("photodiode_bias (Circuit, adlin.devices)", photodiode_bias())

    head = (f"\n{'model':<42}{'matrix':<7}{'method':<20}{'nonzeros':>9}"
            f"{'max rel (entry)':>17}{'max rel (row norm)':>20}{'spurious':>10}")
    print(head)
    print("-" * (len(head) - 1))
    for r in rows:
        sp = f"{r['spurious']}" + (f" (max {r['spurious_max']:.1e})" if r["spurious"] else "")
        print(f"{r['model']:<42}{r['matrix']:<7}{r['method']:<20}{r['entries']:>9}"
              f"{r['entry']:>17.2e}{r['norm']:>20.2e}  {sp:>8}")

    print()
    for model in dict.fromkeys(r["model"] for r in rows):
        ad = [r for r in rows if r["model"] == model and r["method"].startswith("adlin")]
        fd = [r for r in rows if r["model"] == model and r["method"] == "central FD"]
        worst = max(max(r["entry"], r["norm"]) for r in ad)
        worst_fd = max(max(r["entry"], r["norm"]) for r in fd)
        spurious = sum(r["spurious"] for r in ad)
        met = worst <= TARGET and spurious == 0
        n_entries = sum(r["entries"] for r in ad)
        print(f"{model}: adlin worst relative error {worst:.2e} over {n_entries} "
              f"entries -> target <= {TARGET:.0e} {'MET' if met else 'NOT MET'}"
              f"{'' if spurious == 0 else f' ({spurious} spurious nonzeros)'}; "
              f"central FD worst {worst_fd:.2e} ({worst_fd / max(worst, 1e-300):.1e} x adlin)")


if __name__ == "__main__":
    main()

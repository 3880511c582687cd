"""Second- and third-harmonic responses at an operating point by nested AD.

The harmonic-input (probing) method of Volterra-series analysis: drive one
input with a cos(w t), expand the model in powers of the amplitude around the
operating point, and solve, order by order, the linear system of the
small-signal model at the frequency that order produces.  The derivative
tensors are never formed: each is contracted with the lower-order responses by
nested forward-mode AD (Jacobian-vector products of Jacobian-vector products).
"""

from __future__ import annotations

import functools

import equinox as eqx
import jax
import jax.numpy as jnp
from jaxtyping import Array, Complex, Float

from .._system import System


class HarmonicKernels(eqx.Module):
    """Harmonic responses of every output to a unit-amplitude cosine on one input.

    With the input deviation a cos(w t) = (a/2) e^{jwt} + c.c., the output
    deviation to third order in a is

        y(t) = a Y1 e^{jwt} + a^2 (Y20 + Y2 e^{2jwt}) + a^3 Y3 e^{3jwt} + c.c. + ...

    so the k-th harmonic of the output has amplitude 2 a^k |Yk| (to leading
    order), and HD2 = a |Y2| / |Y1|, HD3 = a^2 |Y3| / |Y1|.  HD3 includes the
    part of the third harmonic that the second-order response makes by mixing
    with the first (the F2[Z1, Z2] terms below), which is what makes a circuit
    with feedback or memory differ from a cubic term alone.  Orders above three
    (harmonics 4 and up, and the a^2 corrections to HD2 and HD3) are neglected.

    The method: Bussgang, Ehrman & Graham, "Analysis of nonlinear systems with
    multiple inputs", Proc. IEEE 62(8), 1974 (harmonic input method); Wambacq &
    Sansen, Distortion Analysis of Analog Integrated Circuits, Kluwer 1998,
    ch. 3-4 (from memory).

    For the model d/dt q(x) + f(x, u) = 0, y = g(x, u), with z = (x, u), the
    Taylor terms F2[v, w] = d^2 f/dz^2 [v, w] (and Q2, G2, F3, ...), and
    E = dq/dx, A = -df/dx, B = -df/du, C = dg/dx, D = dg/du:

        (jw E - A) X1 = B U,                    U = e_input / 2
        (2jw E - A) X2 = -(F2[Z1,Z1]/2 + 2jw Q2[Z1,Z1]/2),       Z1 = (X1, U)
        (3jw E - A) X3 = -(F2[Z1,Z2] + F3[Z1,Z1,Z1]/6
                           + 3jw (Q2[Z1,Z2] + Q3[Z1,Z1,Z1]/6)),   Z2 = (X2, 0)
        Y1 = C X1 + D U,  Y2 = C X2 + G2[Z1,Z1]/2,
        Y3 = C X3 + G2[Z1,Z2] + G3[Z1,Z1,Z1]/6

    (and the DC shift A X20 = F2[Z1, conj Z1], Y20 = C X20 + G2[Z1, conj Z1]).

    **Fields** (each with a trailing frequency axis of length k):

    - `omega`: angular frequencies w (rad/s), shape (k,).
    - `y1`, `y2`, `y3`: complex phasors Y1, Y2, Y3 of every output, shape (o, k).
    - `y20`: the DC shift of the outputs per squared amplitude, shape (o, k).
    - `x1`, `x2`, `x20`, `x3`: the same for the unknowns, shape (n, k) (used to
      start a transient close to its periodic steady state).
    """

    omega: Float[Array, " k"]
    y1: Complex[Array, "o k"]
    y2: Complex[Array, "o k"]
    y3: Complex[Array, "o k"]
    y20: Float[Array, "o k"]
    x1: Complex[Array, "n k"]
    x2: Complex[Array, "n k"]
    x20: Float[Array, "n k"]
    x3: Complex[Array, "n k"]

    def hd2(self, amplitude) -> Float[Array, "o k"]:
        """Second-harmonic distortion at input amplitude `amplitude` (leading order)."""
        return jnp.asarray(amplitude) * jnp.abs(self.y2) / jnp.abs(self.y1)

    def hd3(self, amplitude) -> Float[Array, "o k"]:
        """Third-harmonic distortion at input amplitude `amplitude` (leading order)."""
        return jnp.asarray(amplitude) ** 2 * jnp.abs(self.y3) / jnp.abs(self.y1)


def _multilinear(fn, z0):
    """Real first, second and third derivatives of fn at z0 along given directions."""

    def d1(z, v):
        return jax.jvp(fn, (z,), (v,))[1]

    def d2(z, v, w):
        return jax.jvp(lambda zz: d1(zz, v), (z,), (w,))[1]

    def d3(z, v, w, s):
        return jax.jvp(lambda zz: d2(zz, v, w), (z,), (s,))[1]

    return (jax.vmap(lambda v, w: d2(z0, v, w)),
            jax.vmap(lambda v, w, s: d3(z0, v, w, s)))


def _complex_bilinear(d2, v, w):
    """Symmetric bilinear form at complex arguments from four real evaluations."""
    vr, vi, wr, wi = jnp.real(v), jnp.imag(v), jnp.real(w), jnp.imag(w)
    vals = d2(jnp.stack([vr, vi, vr, vi]), jnp.stack([wr, wi, wi, wr]))
    return (vals[0] - vals[1]) + 1j * (vals[2] + vals[3])


def _complex_square_and_modulus(d2, v):
    """D2[v, v] and D2[v, conj v] for complex v from three real evaluations."""
    r, s = jnp.real(v), jnp.imag(v)
    vals = d2(jnp.stack([r, s, r]), jnp.stack([r, s, s]))
    return (vals[0] - vals[1]) + 2j * vals[2], vals[0] + vals[1]


def _complex_cube(d3, v):
    """Symmetric trilinear form D3[v, v, v] for complex v from four real evaluations."""
    r, s = jnp.real(v), jnp.imag(v)
    vals = d3(jnp.stack([r, r, r, s]), jnp.stack([r, r, s, s]), jnp.stack([r, s, s, s]))
    return (vals[0] - 3.0 * vals[2]) + 1j * (3.0 * vals[1] - vals[3])


def _kernels_one(system: System, input_index: int, x, u, p, omega):
    n = system.n
    m = u.shape[0]

    def stacked(z):
        # f, q and g in one function, so every derivative traces the model once.
        xx, uu = z[:n], z[n:]
        return jnp.concatenate([system.f(xx, uu, p), system.q(xx, p), system.g(xx, uu, p)])

    z0 = jnp.concatenate([x, u])
    J = jax.jacfwd(stacked)(z0)
    Jf, Jq, Jg = J[:n], J[n:2 * n], J[2 * n:]
    E, A, B = Jq[:, :n], -Jf[:, :n], -Jf[:, n:]
    C, D = Jg[:, :n], Jg[:, n:]
    d2, d3 = _multilinear(stacked, z0)

    def split(v):
        return v[:n], v[n:2 * n], v[2 * n:]

    U = 0.5 * (jnp.arange(m) == input_index).astype(jnp.float64)
    jw = 1j * omega
    X1 = jnp.linalg.solve(jw * E - A, (B @ U).astype(jnp.complex128))
    Z1 = jnp.concatenate([X1, U.astype(jnp.complex128)])
    Y1 = C @ X1 + D @ U

    sq, mod = _complex_square_and_modulus(d2, Z1)
    F2, Q2, G2 = split(sq)
    X2 = jnp.linalg.solve(2.0 * jw * E - A, -(0.5 * F2 + jw * Q2))
    Y2 = C @ X2 + 0.5 * G2
    F20, _, G20 = split(mod)
    X20 = jnp.linalg.solve(A, F20)
    Y20 = C @ X20 + G20

    Z2 = jnp.concatenate([X2, jnp.zeros((m,), jnp.complex128)])
    F12, Q12, G12 = split(_complex_bilinear(d2, Z1, Z2))
    F3, Q3, G3 = split(_complex_cube(d3, Z1))
    N3 = F12 + F3 / 6.0 + 3.0 * jw * (Q12 + Q3 / 6.0)
    X3 = jnp.linalg.solve(3.0 * jw * E - A, -N3)
    Y3 = C @ X3 + G12 + G3 / 6.0
    return Y1, Y2, Y3, Y20, X1, X2, X20, X3


@functools.lru_cache(maxsize=64)
def _kernels_program(system: System, input_index: int):
    """One jitted program per (System, input): vmapped over frequency."""

    def run(x, u, pvec, omega):
        out = jax.vmap(lambda w: _kernels_one(system, input_index, x, u, pvec, w))(omega)
        y1, y2, y3, y20, x1, x2, x20, x3 = (jnp.moveaxis(a, 0, -1) for a in out)
        return HarmonicKernels(omega=omega, y1=y1, y2=y2, y3=y3, y20=jnp.real(y20),
                               x1=x1, x2=x2, x20=jnp.real(x20), x3=x3)

    return jax.jit(run)


def harmonic_kernels(system: System, op, input_index: int, f_hz) -> HarmonicKernels:
    """Harmonic responses Y1, Y2, Y3 at the operating point for each frequency.

    **Arguments:**

    - `system`: the model.
    - `op`: an `OperatingPoint` of `system` (its x, u, p are used; traced
      values work under jit, vmap and grad).
    - `input_index`: position of the driven input in `system.inputs`.
    - `f_hz`: frequencies (Hz), scalar or 1-D.

    **Returns:** a `HarmonicKernels` for a unit-amplitude cosine.
    """
    omega = 2.0 * jnp.pi * jnp.atleast_1d(jnp.asarray(f_hz, dtype=jnp.float64))
    return _kernels_program(system, int(input_index))(op.x, op.u, op.p, omega)

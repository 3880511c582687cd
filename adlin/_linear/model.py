"""LinearModel: the small-signal model E dx/dt = A x + B u, y = C x + D u."""

from __future__ import annotations

import functools
import math

import equinox as eqx
import jax
import jax.numpy as jnp
import jax.scipy.linalg as jsl
import numpy as np
from jaxtyping import Array, Float

from .._errors import AnalysisError, HighIndexError, ParameterError, did_you_mean
from .pole_table import RootTable, group_roots
from .reduce import reduce_descriptor
from .zeros import siso_zeros

PARTITION_TOL = 1e-9
INDEX_COND = 1e13


@functools.partial(jax.jit, static_argnums=(8,))
def _reduce(E, A, B, C, D, x0, left, right, r: int):
    """Reduced (A, B, C, D), the reduced states' bias, identity E, and the checks."""
    Ar, Br, Cr, Dr, off, cond = reduce_descriptor(E, A, B, C, D, left, right, r)
    xz = jnp.linalg.solve(right, x0)[:r]
    eye = jnp.eye(r, dtype=A.dtype)
    return Ar, Br, Cr, Dr, xz, eye, off, cond


@jax.jit
def dc_gain(A, B, C, D):
    return D - C @ jnp.linalg.solve(A, B)


@jax.jit
def sorted_eigvals(A):
    p = jnp.linalg.eigvals(A)
    return p[jnp.argsort(jnp.abs(p))]


@jax.jit
def _transfer(E, A, B, C, D, s):
    def one(sk):
        X = jnp.linalg.solve(sk * E - A, B.astype(jnp.complex128))
        return C @ X + D

    return jnp.moveaxis(jax.vmap(one)(s), 0, -1)


@jax.jit
def _step(A, B, C, D, t):
    r, m = B.shape
    big = jnp.zeros((r + m, r + m)).at[:r, :r].set(A).at[:r, r:].set(B)

    def one(tk):
        # integral of exp(A s) ds B over [0, t]; stiff models need many squarings
        gamma = jsl.expm(big * tk, max_squarings=64)[:r, r:]
        return C @ gamma + D

    return jnp.moveaxis(jax.vmap(one)(t), 0, -1)


def _concrete(*arrays) -> bool:
    return not any(isinstance(a, jax.core.Tracer) for a in arrays)


class LinearModel(eqx.Module):
    """Small-signal model around an operating point, in descriptor form.

        E d(dx)/dt = A dx + B du,    dy = C dx + D du

    with dx = x - x0, du = u - u0, dy = y - y0 (deviations from the bias).
    E = dq/dx, A = -df/dx, B = -df/du, C = dg/dx, D = dg/du, all exact
    (automatic differentiation).  Frequencies are in Hz where arguments are
    frequencies, poles and zeros in rad/s.

    A pytree: usable under jit, vmap and grad.  `reduce()` gives the
    state-space form with E = I; `poles()`, `zeros()`, `freq_response()`,
    `dc_gain()`, `step()`, `pole_table()`, `to_scipy()`, `normalize()`.
    """

    E: Float[Array, "n n"]
    A: Float[Array, "n n"]
    B: Float[Array, "n m"]
    C: Float[Array, "o n"]
    D: Float[Array, "o m"]
    x0: Float[Array, " n"]
    u0: Float[Array, " m"]
    y0: Float[Array, " o"]
    left: Float[Array, "n n"]
    right: Float[Array, "n n"]
    n_dynamic: int = eqx.field(static=True)
    state_names: tuple[str, ...] = eqx.field(static=True)
    input_names: tuple[str, ...] = eqx.field(static=True)
    output_names: tuple[str, ...] = eqx.field(static=True)
    dynamic_names: tuple[str, ...] = eqx.field(static=True)
    unit_items: tuple[tuple[str, str], ...] = eqx.field(static=True, default=())
    reduced: bool = eqx.field(static=True, default=False)  # True: E = I, no algebraic part

    def unit(self, name: str) -> str:
        return dict(self.unit_items).get(name, "")

    def reduce(self) -> LinearModel:
        """Eliminate the algebraic unknowns: an E = I model on the dynamic states.

        The reduced states carry the names of the unknowns whose storage they
        hold (`dynamic_names`).  Exact for index-1 models and differentiable.

        **Raises:** `HighIndexError` when the algebraic block is singular at
        this operating point (checked when values are concrete).
        """
        if self.reduced:
            return self
        r = self.n_dynamic
        Ar, Br, Cr, Dr, xz, eye, off, cond = _reduce(
            self.E, self.A, self.B, self.C, self.D, self.x0, self.left, self.right, r
        )
        if _concrete(off, cond):
            if float(cond) > INDEX_COND or not math.isfinite(float(cond)):
                alg = [n for n in self.state_names if n not in self.dynamic_names]
                raise HighIndexError(
                    f"the algebraic part (unknowns {alg}) is singular at this operating point "
                    f"(condition number {float(cond):.3g}); the model has index > 1 here, e.g. a "
                    "source tied across a capacitor or a device switched fully off; add a small "
                    "series resistance or move the bias."
                )
            if float(off) > PARTITION_TOL:
                raise AnalysisError(
                    "the storage matrix E changed its null space at this operating point "
                    f"(off-block size {float(off):.3g}), so the compile-time partition into "
                    "dynamic and algebraic unknowns does not hold here; report this model."
                )
        return LinearModel(
            E=eye, A=Ar, B=Br, C=Cr, D=Dr,
            x0=xz, u0=self.u0, y0=self.y0,
            left=eye, right=eye, n_dynamic=r,
            state_names=self.dynamic_names, input_names=self.input_names,
            output_names=self.output_names, dynamic_names=self.dynamic_names,
            unit_items=self.unit_items, reduced=True,
        )

    def state_space(self):
        """(A, B, C, D) of the reduced model, E = I."""
        red = self.reduce()
        return red.A, red.B, red.C, red.D

    # -- poles and zeros ------------------------------------------------------
    def poles(self) -> jax.Array:
        """Finite poles in rad/s (complex), sorted by magnitude.

        There are exactly `n_dynamic` of them for an index-1 model.
        """
        A, _, _, _ = self.state_space()
        if A.shape[0] == 0:
            return jnp.zeros((0,), jnp.complex128)
        return sorted_eigvals(A)

    def _pair(self, input: str | None, output: str | None) -> tuple[int, int]:
        def pick(kind, names, name):
            if name is None:
                if len(names) != 1:
                    raise AnalysisError(
                        f"the model has {len(names)} {kind}s {list(names)}; choose one with "
                        f"{kind}=...")
                return 0
            if name not in names:
                raise ParameterError(f"unknown {kind} {name!r}: {did_you_mean(name, names)}.")
            return names.index(name)

        return pick("input", self.input_names, input), pick("output", self.output_names, output)

    def zeros(self, input: str | None = None, output: str | None = None) -> jax.Array:
        """Finite transmission zeros (rad/s) from `input` to `output`.

        With concrete values the zeros at infinity are dropped; under jit,
        vmap or grad the array keeps length `n_dynamic` and zeros at infinity
        are `inf`.
        """
        i, o = self._pair(input, output)
        A, B, C, D = self.state_space()
        if _concrete(A, B, C, D):
            from .zeros import host_siso_zeros
            z = host_siso_zeros(np.asarray(A), np.asarray(B)[:, i], np.asarray(C)[o],
                                np.asarray(D)[o, i])
            return jax.device_put(z[np.isfinite(z)])
        z = siso_zeros(A, B[:, i], C[o], D[o, i])
        if _concrete(z):
            z = np.asarray(z)
            return jax.device_put(z[np.isfinite(z)])
        return z

    # -- responses -------------------------------------------------------------
    def transfer(self, s) -> jax.Array:
        """H(s) = C (sE - A)^-1 B + D at complex s (rad/s), shape (outputs, inputs, len(s))."""
        s = np.atleast_1d(np.asarray(s, dtype=complex)) if _concrete(s) else jnp.atleast_1d(s)
        return _transfer(self.E, self.A, self.B, self.C, self.D, s)

    def freq_response(self, f_hz) -> jax.Array:
        """Complex frequency response at `f_hz` (Hz): shape (outputs, inputs, len(f_hz))."""
        if _concrete(f_hz):
            return self.transfer(2j * np.pi * np.atleast_1d(np.asarray(f_hz, dtype=float)))
        return self.transfer(2j * jnp.pi * jnp.atleast_1d(f_hz))

    def dc_gain(self) -> jax.Array:
        """Small-signal gain at DC, D - C A^-1 B, shape (outputs, inputs)."""
        return dc_gain(self.A, self.B, self.C, self.D)

    def step(self, t_s) -> jax.Array:
        """Response to a unit step on each input, exact (matrix exponential).

        **Arguments:** `t_s`: times in seconds (>= 0).

        **Returns:** shape (outputs, inputs, len(t_s)), deviation from the bias.
        """
        A, B, C, D = self.state_space()
        t = np.atleast_1d(np.asarray(t_s, dtype=float)) if _concrete(t_s) else jnp.atleast_1d(t_s)
        return _step(A, B, C, D, t)

    def response(self, stimulus, t_s, *, method: str = "exact") -> jax.Array:
        """Output deviations (len(t_s), outputs) driven by an `adlin.stimuli` stimulus.

        Starts from rest at t = 0; exact for steps, pulses, tables and sines.
        See `adlin.linear_response` for the arguments and what is exact.
        """
        from .._trust.linear_response import linear_response

        return linear_response(self, stimulus, t_s, method=method)

    # -- tables and exports ------------------------------------------------------
    def pole_table(self) -> RootTable:
        """Poles with frequency (Hz), damping ratio, Q and time constant."""
        return RootTable("pole", tuple(group_roots(np.asarray(self.poles()))))

    def zero_table(self, input: str | None = None, output: str | None = None) -> RootTable:
        return RootTable("zero", tuple(group_roots(np.asarray(self.zeros(input, output)))))

    def to_scipy(self):
        """The reduced model as a `scipy.signal.StateSpace` (continuous time)."""
        import scipy.signal

        A, B, C, D = (np.asarray(M) for M in self.state_space())
        return scipy.signal.StateSpace(A, B, C, D)

    def normalize(self, **kwargs):
        """Dimensionless form; see `adlin.normalize` for the arguments."""
        from .normalize import normalize

        return normalize(self, **kwargs)

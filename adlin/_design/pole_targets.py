"""Targets on the poles: place a pole or a pole pair, minimum damping, stability margin.

Placement losses never look at individual eigenvalues.  They use the ratio of
characteristic polynomials

    b(s) = det(s E - A) / det(-s E - A) = prod_k (s - p_k) / (-s - p_k)

over the finite poles p_k (infinite poles of a singular E cancel), a rational
function of the matrix entries and so smooth however the poles coalesce or
swap order.  Over a spectrum closed under conjugation |b(s)| is the product of
the pseudo-hyperbolic distances |p_k - s| / |p_k + conj(s)| of the left
half-plane (Garnett, Bounded Analytic Functions, Springer 2007, ch. I.1, for
the disc; from memory): each factor is below 1 for a stable pole, tends to 1
for a pole far from s in either direction, does not depend on the frequency
scale, and vanishes exactly when p_k = s.  It is computed as det of
(-s E - A)^-1 (s E - A), which neither overflows nor underflows.

The all-pole bounds (`MinDamping`, `StabilityMargin`) are sums over poles of a
squared hinge, so they do not depend on the poles' order, and only poles that
violate the bound carry derivatives: a repeated pole that meets the bound
contributes an exact zero.  Where violating poles coalesce these losses are
not differentiable (spectral functions are not even Lipschitz at a defective
eigenvalue; Burke & Overton, "Variational analysis of non-Lipschitz spectral
functions", Math. Programming 90, 2001): the gradient there is finite but
one-sided.
"""

from __future__ import annotations

import math

import jax
import jax.numpy as jnp

from .._errors import ParameterError
from .._units import si
from .quantities import finite_poles
from .target_base import (
    BOUND_SLACK,
    AbstractTarget,
    check_positive,
    check_weight,
    finite,
    number,
    squared_hinge,
)


def pole_ratio(model, s) -> jax.Array:
    """b(s) = det(s E - A) / det(-s E - A) (complex), smooth in the model's matrices."""
    E = model.E.astype(jnp.complex128)
    A = model.A.astype(jnp.complex128)
    return jnp.linalg.det(jnp.linalg.solve(-s * E - A, s * E - A))


def _pair_roots(f_hz: float, zeta: float) -> tuple[complex, complex]:
    w = 2 * math.pi * f_hz
    if zeta < 1:
        r = complex(-zeta * w, w * math.sqrt(1 - zeta * zeta))
        return r, r.conjugate()
    d = w * math.sqrt(zeta * zeta - 1)
    return complex(-zeta * w + d, 0.0), complex(-zeta * w - d, 0.0)


def _nearest_pair(poles, s1: complex, s2: complex):
    """The two poles standing for a target pair: the nearest to s1, then its conjugate
    partner (a complex pole) or the nearest other pole to s2 (a real one)."""
    i = jnp.argmin(jnp.abs(poles - s1))
    pi = poles[i]
    other = jnp.where(jnp.abs(pi.imag) > 1e-9 * jnp.abs(pi), jnp.conj(pi), s2)
    dist = jnp.where(jnp.arange(poles.shape[0]) == i, jnp.inf, jnp.abs(poles - other))
    return pi, poles[jnp.argmin(dist)]


def _no_poles(model) -> bool:
    return model.n_dynamic == 0


class PolePair(AbstractTarget):
    """Place a pole pair: the roots of s^2 + 2 zeta w s + w^2, w = 2 pi f_hz.

    For 0 <= zeta < 1 a complex pair, for zeta >= 1 two real poles (a double
    pole at zeta = 1).  Loss: |b(s1)|^2 for a complex pair (the conjugate
    follows for a real model); |b(s1)|^2 + |w b[s1, s2]|^2 for real roots,
    where b[s1, s2] is the divided difference (the derivative b'(s1) for a
    double root), so both roots must be poles.  Near the target the loss is
    about (|dp| / (2 |Re s1|))^2 times the other poles' factors, dp the
    distance of the nearest pole.

    **Fields:**

    - `f_hz`: natural frequency (Hz).
    - `zeta`: damping ratio (>= 0).
    - `rtol`: met when the nearest pair's natural frequency is within `rtol`
      (relative) ...
    - `zeta_tol`: ... and its damping within `zeta_tol` (absolute).
    - `weight`: multiplies the loss.

    Achieved: natural frequency (Hz) and damping of the pair of poles nearest
    the target (sqrt(p1 p2) / 2 pi and -(p1 + p2) / (2 sqrt(p1 p2))).
    """

    f_hz: float = number()
    zeta: float = number()
    rtol: float = number(0.01)
    zeta_tol: float = number(0.01)
    weight: float = number(1.0)

    def __check_init__(self):
        check_positive("PolePair", f_hz=self.f_hz, rtol=self.rtol, zeta_tol=self.zeta_tol)
        if not (finite(self.zeta) and self.zeta >= 0):
            raise ParameterError(f"PolePair.zeta must be a damping ratio >= 0, got {self.zeta!r}.")
        check_weight("PolePair", self.weight)

    def roots(self) -> tuple[complex, complex]:
        return _pair_roots(self.f_hz, self.zeta)

    def loss(self, op, model):
        s1, s2 = self.roots()
        b1 = pole_ratio(model, s1)
        if self.zeta < 1:
            return jnp.abs(b1) ** 2
        w = 2 * math.pi * self.f_hz
        if abs(s1 - s2) < 1e-6 * w:
            _, slope = jax.jvp(lambda s: pole_ratio(model, s), (jnp.asarray(s1),),
                               (jnp.asarray(1.0 + 0j),))
        else:
            slope = (b1 - pole_ratio(model, s2)) / (s1 - s2)
        return jnp.abs(b1) ** 2 + jnp.abs(w * slope) ** 2

    def achieved(self, op, model):
        if _no_poles(model):
            return jnp.array([jnp.nan, jnp.nan])
        poles = jax.lax.stop_gradient(finite_poles(model))
        if poles.shape[0] < 2:
            return jnp.array([jnp.nan, jnp.nan])
        p1, p2 = _nearest_pair(poles, *self.roots())
        w2 = jnp.real(p1 * p2)
        w = jnp.sqrt(jnp.abs(w2))
        return jnp.stack([w / (2 * jnp.pi), -jnp.real(p1 + p2) / (2 * w)])

    def met(self, op, model):
        f, z = self.achieved(op, model)
        return (jnp.abs(f - self.f_hz) <= self.rtol * self.f_hz) & \
            (jnp.abs(z - self.zeta) <= self.zeta_tol)

    def describe(self) -> str:
        return f"pole pair at {si(self.f_hz, 'Hz')} with damping {self.zeta:.3g}"

    def labels(self):
        return (("natural frequency", "Hz"), ("damping", ""))


class RealPole(AbstractTarget):
    """Place a real pole at s = -2 pi f_hz.  Loss |b(s)|^2 (see the module).

    **Fields:** `f_hz` (Hz), `rtol` (met when the nearest pole is real and its
    frequency within `rtol`, relative), `weight`.

    Achieved: frequency |p| / 2 pi (Hz) of the nearest pole and its damping
    (1 for a real pole in the left half-plane).
    """

    f_hz: float = number()
    rtol: float = number(0.01)
    weight: float = number(1.0)

    def __check_init__(self):
        check_positive("RealPole", f_hz=self.f_hz, rtol=self.rtol)
        check_weight("RealPole", self.weight)

    def loss(self, op, model):
        return jnp.abs(pole_ratio(model, -2 * math.pi * self.f_hz)) ** 2

    def achieved(self, op, model):
        if _no_poles(model):
            return jnp.array([jnp.nan, jnp.nan])
        poles = jax.lax.stop_gradient(finite_poles(model))
        p = poles[jnp.argmin(jnp.abs(poles + 2 * jnp.pi * self.f_hz))]
        return jnp.stack([jnp.abs(p) / (2 * jnp.pi), -jnp.real(p) / jnp.abs(p)])

    def met(self, op, model):
        f, z = self.achieved(op, model)
        return (jnp.abs(f - self.f_hz) <= self.rtol * self.f_hz) & (z >= 1 - self.rtol)

    def describe(self) -> str:
        return f"real pole at {si(self.f_hz, 'Hz')}"

    def labels(self):
        return (("frequency", "Hz"), ("damping", ""))


def _violating(values, violation):
    """`values` where `violation` > 0, constants elsewhere: poles that meet the bound
    carry no derivative, so a repeated pole there cannot put 0 * inf into the gradient."""
    keep = jax.lax.stop_gradient(violation) > 0
    return jnp.where(keep, values, jax.lax.stop_gradient(values))


def _damping(poles):
    mag = jnp.sqrt(jnp.real(poles) ** 2 + jnp.imag(poles) ** 2 + 1e-300)
    return -jnp.real(poles) / mag


class MinDamping(AbstractTarget):
    """Every pole has a damping ratio -Re(p)/|p| of at least `zeta_min`.

    Loss: sum over poles of max(zeta_min - zeta_k, 0)^2 (a complex pair counts
    twice).  Achieved: the smallest damping ratio (a pole at the origin counts
    as 0; an unstable pole is negative).

    **Fields:** `zeta_min` (in (-1, 1]; 0 is "no unstable pole"), `weight`.
    """

    zeta_min: float = number()
    weight: float = number(1.0)

    def __check_init__(self):
        if not (finite(self.zeta_min) and -1 < self.zeta_min <= 1):
            raise ParameterError(f"MinDamping.zeta_min must be a damping ratio in (-1, 1], got "
                                 f"{self.zeta_min!r}.")
        check_weight("MinDamping", self.weight)

    def loss(self, op, model):
        if _no_poles(model):
            return jnp.asarray(0.0)
        poles = finite_poles(model)
        gap = self.zeta_min - _damping(jax.lax.stop_gradient(poles))
        return jnp.sum(squared_hinge(self.zeta_min - _damping(_violating(poles, gap))))

    def achieved(self, op, model):
        if _no_poles(model):
            return jnp.array([1.0])
        return jnp.min(_damping(jax.lax.stop_gradient(finite_poles(model))))[None]

    def met(self, op, model):
        return self.achieved(op, model)[0] >= self.zeta_min - BOUND_SLACK

    def describe(self) -> str:
        return f"every pole damped at least {self.zeta_min:.3g}"

    def labels(self):
        return (("smallest damping", ""),)


class StabilityMargin(AbstractTarget):
    """Every pole has a real part of at most `max_real_rad_s` (a decay rate of at
    least -max_real_rad_s: settling margin).

    Loss: sum over poles of max((Re p_k - max_real) / scale_k, 0)^2 with scale
    |max_real| (or |p_k| when max_real is 0, which asks for plain stability).
    Achieved: the largest real part (spectral abscissa), rad/s.

    **Fields:** `max_real_rad_s` (rad/s, usually negative), `weight`.
    """

    max_real_rad_s: float = number()
    weight: float = number(1.0)

    def __check_init__(self):
        if not finite(self.max_real_rad_s):
            raise ParameterError(f"StabilityMargin.max_real_rad_s must be finite, got "
                                 f"{self.max_real_rad_s!r}.")
        check_weight("StabilityMargin", self.weight)

    def _excess(self, poles):
        m = self.max_real_rad_s
        if m != 0:
            return (jnp.real(poles) - m) / abs(m)
        return jnp.real(poles) / jnp.sqrt(jnp.abs(poles) ** 2 + 1e-300)

    def loss(self, op, model):
        if _no_poles(model):
            return jnp.asarray(0.0)
        poles = finite_poles(model)
        ex = self._excess(jax.lax.stop_gradient(poles))
        return jnp.sum(squared_hinge(self._excess(_violating(poles, ex))))

    def achieved(self, op, model):
        if _no_poles(model):
            return jnp.array([-jnp.inf])
        return jnp.max(jnp.real(jax.lax.stop_gradient(finite_poles(model))))[None]

    def met(self, op, model):
        slack = BOUND_SLACK * max(abs(self.max_real_rad_s), 1.0)
        return self.achieved(op, model)[0] <= self.max_real_rad_s + slack

    def describe(self) -> str:
        return f"every pole's real part at most {self.max_real_rad_s:.4g} rad/s"

    def labels(self):
        return (("largest real part", "rad/s"),)

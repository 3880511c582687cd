"""The exact response of a linear (LTI) small-signal model to a stimulus.

The reduced model x' = A x + B u, y = C x + D u starts at rest (x = 0: the
operating point) at t = 0, and the stimulus gives the input deviation u(t).
Two exact pieces are superposed:

- Piecewise-linear parts (steps, pulses, piecewise-linear tables): the time
  axis is cut at the output grid and at every edge of the stimulus, so the
  input is a straight line on each segment; the state then moves from one cut
  to the next by the first-order-hold formula

      x_{k+1} = Phi x_k + (G0 - G1) u_a + G1 u_b,

  Phi = exp(A h), G0 = int_0^h exp(A s) ds B, G1 the ramp term, all read from
  one matrix exponential of the block matrix [[A h, B h, 0], [0, 0, I],
  [0, 0, 0]] (Van Loan, "Computing integrals involving the matrix
  exponential", IEEE Trans. Automatic Control 23(3), 1978; Franklin, Powell &
  Workman, Digital Control of Dynamic Systems, 3rd ed., sec. 6.3.2, triangle
  hold).  u_a and u_b are the one-sided values at the segment's ends, so a
  jump at an edge is taken exactly.
- Sines: the steady-state phasor x_p = Im[a e^{i(w (t - t0) + phi)} (i w I - A)^-1 B]
  plus the free response exp(A (t - t_s)) that cancels it at the start t_s,
  so the state is continuous and starts from rest (closed form; any linear
  systems text, e.g. Chen, Linear System Theory and Design, 3rd ed., sec. 4.2).

Anything else (a JAX function of time) is held linearly between the cuts: a
second-order approximation whose error shrinks as (grid step)^2; pass a finer
grid when that matters.  `method="grid"` holds every stimulus, sines included,
linearly between the samples on the output grid, which is what
`scipy.signal.lsim` does with its default linear interpolation.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import equinox as eqx
import jax
import jax.numpy as jnp
import jax.scipy.linalg as jsl
import numpy as np

from .._errors import AnalysisError, ParameterError, did_you_mean

# Cuts closer than this fraction of the time span are merged: a segment that
# short carries no information and would only cost a matrix exponential.
MERGE_FRACTION = 1e-12
# Segment lengths that agree to this relative precision share one propagator
# (a uniform grid's steps differ by rounding only).
LENGTH_RTOL = 1e-10
# jax's expm returns NaN when |A h| needs more squarings than this (its default
# is 16, |A h| up to ~3.5e5).  Stiff circuit models need more: the demo
# regulator spans poles from 1e3 to 1.8e12 rad/s, |A h| ~ 5e7 on a grid
# resolving the slow pole.  64 covers |A h| up to ~1e20.
MAX_SQUARINGS = 64


def _bucket(n: int, least: int) -> int:
    """n rounded up to a power of two (>= least): padded shapes compile once."""
    return least if n <= least else 1 << (n - 1).bit_length()


def validate_stimuli(stimulus, input_names: tuple[str, ...]):
    """(stimuli, index): the stimuli as a tuple and the input each one drives.

    **Raises:** `ParameterError` for something that is not a stimulus or an
    input name not in `input_names` (with the closest valid names).
    """
    from .._transient.stimuli import AbstractStimulus

    items = (stimulus,) if isinstance(stimulus, AbstractStimulus) else stimulus
    if not isinstance(items, (tuple, list)) or not items:
        raise ParameterError(
            "stimulus must be an adlin.stimuli stimulus (Step, Pulse, Sine, SumOfSines, "
            f"PiecewiseLinear, FromFunction) or a non-empty tuple of them, got {stimulus!r}.")
    index = []
    for s in items:
        if not isinstance(s, AbstractStimulus):
            raise ParameterError(f"{s!r} is not a stimulus; use one of adlin.stimuli's classes.")
        if s.input not in input_names:
            raise ParameterError(f"the stimulus drives unknown input {s.input!r}: "
                                 f"{did_you_mean(s.input, input_names)}.")
        index.append(input_names.index(s.input))
    return tuple(items), tuple(index)


def check_grid(t) -> np.ndarray:
    """A concrete, increasing time grid at t >= 0, as float64 numpy."""
    if isinstance(t, jax.core.Tracer):
        raise AnalysisError("the time grid must be concrete (a numpy array or list), not a "
                            "traced value; build it outside jit.")
    t = np.atleast_1d(np.asarray(t, dtype=float))
    if t.ndim != 1 or t.size == 0 or not np.all(np.isfinite(t)):
        raise AnalysisError("the time grid must be a non-empty 1-D array of finite times (s).")
    if t[0] < 0 or np.any(np.diff(t) <= 0):
        raise AnalysisError("the time grid must start at t >= 0 s and increase strictly; "
                            "the model is at its operating point at t = 0.")
    return t


def tones(stimulus):
    """The sine components of a stimulus as (amplitude, f_hz, phase_rad, t0) tuples.

    Returns None when the stimulus is not made of sines.  The convention is
    that of `adlin.stimuli`: a sin(2 pi f (t - t0) + phase) for t >= t0, zero
    before.
    """
    from .._transient.stimuli import Sine, SumOfSines

    if isinstance(stimulus, Sine):
        return ((stimulus.amplitude, float(stimulus.f_hz),
                 math.radians(float(stimulus.phase_deg)), float(stimulus.t0)),)
    if isinstance(stimulus, SumOfSines):
        amps = stimulus.amplitudes
        freqs = np.asarray(stimulus.f_hz, dtype=float)
        phases = np.zeros(freqs.shape) if stimulus.phases_deg is None else \
            np.radians(np.asarray(stimulus.phases_deg, dtype=float))
        return tuple((amps[k], float(freqs[k]), float(phases[k]), 0.0) for k in range(freqs.size))
    return None


def _deviation(stimuli, index, m, t):
    """Summed input deviations (len(t), m) of `stimuli` at the times `t`."""
    t = jnp.asarray(t)
    out = jnp.zeros((t.shape[0], m))
    for s, i in zip(stimuli, index, strict=True):
        # one-hot product, not a scatter-add (DEVELOPERS.md: scatter-adds in
        # batched programs misbehaved on this jaxlib)
        out = out + jax.vmap(s)(t)[:, None] * jnp.asarray(np.eye(m)[i])[None, :]
    return out


@jax.jit
def hold_propagators(A, B, h):
    """Phi, G0 - G1, G1 for each segment length in `h` (first-order hold)."""
    r, m = B.shape
    z_rm = jnp.zeros((r, m))
    z_mr = jnp.zeros((m, r))
    z_mm = jnp.zeros((m, m))
    eye = jnp.eye(m)

    def one(hk):
        M = jnp.block([[A * hk, B * hk, z_rm],
                       [z_mr, z_mm, eye],
                       [z_mr, z_mm, z_mm]])
        F = jsl.expm(M, max_squarings=MAX_SQUARINGS)
        return F[:r, :r], F[:r, r:r + m] - F[:r, r + m:], F[:r, r + m:]

    return jax.vmap(one)(h)


@jax.jit
def _march(Phi, Ga, Gb, seg, ua, ub, inject):
    """States at every cut: x_{k+1} = Phi x_k + Ga u_a + Gb u_b + inject_{k+1}."""

    def body(x, item):
        i, a, b, j = item
        x = Phi[i] @ x + Ga[i] @ a + Gb[i] @ b + j
        return x, x

    _, xs = jax.lax.scan(body, inject[0], (seg, ua, ub, inject[1:]))
    return jnp.concatenate([inject[:1], xs])


def _group_lengths(h: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Representative lengths and, per segment, the index of its representative."""
    order = np.argsort(h)
    hs = h[order]
    new = np.concatenate([[True], np.diff(hs) > LENGTH_RTOL * hs[1:]])
    group = np.cumsum(new) - 1
    seg = np.empty(h.size, dtype=np.int32)
    seg[order] = group
    return hs[new], seg


def _cuts(t: np.ndarray, times) -> np.ndarray:
    """Sorted cut times: 0, the output grid, and the given times inside (0, t_end).

    A time within `MERGE_FRACTION` of the span from another cut is dropped
    (the output grid always stays).
    """
    tol = MERGE_FRACTION * max(float(t[-1]), 1e-300)
    base = np.unique(np.concatenate([[0.0], t]))
    extra = np.unique(np.asarray([e for e in times if 0.0 < e < t[-1]], dtype=float))
    if extra.size:
        pos = np.searchsorted(base, extra)
        left = base[np.clip(pos - 1, 0, base.size - 1)]
        right = base[np.clip(pos, 0, base.size - 1)]
        extra = extra[(np.abs(extra - left) > tol) & (np.abs(right - extra) > tol)]
        extra = extra[np.concatenate([[True], np.diff(extra) > tol])] if extra.size else extra
    return np.sort(np.concatenate([base, extra]))


def linear_response(model, stimulus, t, *, method: str = "exact") -> jax.Array:
    """Output deviations of a linear model driven by a stimulus from rest.

    **Arguments:**

    - `model`: an `adlin.LinearModel` (descriptor or reduced).
    - `stimulus`: one stimulus from `adlin.stimuli` or a tuple of them (summed
      per input); it gives the input deviation from the operating point.
    - `t`: output times in seconds, concrete, increasing, starting at >= 0.
      The model is at its operating point (zero deviation) at t = 0.
    - `method`: "exact" (default): exact for steps, pulses, piecewise-linear
      tables and sines, second order for other functions of time (see the
      module notes); "grid": the first-order hold of the samples on `t` only
      (what `scipy.signal.lsim` computes).

    **Returns:** output deviations, shape (len(t), outputs).  Differentiable
    with respect to the model's matrices and the stimulus amplitudes; works
    under jit and grad as long as `t` is concrete.

    **Raises:**

    - `ParameterError`: a stimulus drives an input the model does not have.
    - `AnalysisError`: a bad grid or method, an index > 1 model, or a sine
      exactly at an undamped resonance of the model (no bounded answer).
    """
    if method not in ("exact", "grid"):
        raise AnalysisError(f"unknown method {method!r} for a linear response: "
                            f"{did_you_mean(method, ('exact', 'grid'))}.")
    stimuli, index = validate_stimuli(stimulus, model.input_names)
    t = check_grid(t)
    A, B, C, D = model.state_space()
    plan = _plan(stimuli, index, t, method)
    ua, ub, u_t, amp = _stimulus_values(stimuli, index, B.shape[1], plan.held, method,
                                        plan.cuts, plan.t)
    y = _respond(A, B, C, D, ua, ub, u_t, amp, plan.tone_input, plan.tone_w, plan.tone_phase,
                 plan.tone_t0, plan.tone_start, plan.lengths, plan.seg, plan.on_grid,
                 plan.t)[: t.size]
    if not isinstance(y, jax.core.Tracer) and not bool(jnp.all(jnp.isfinite(y))):
        raise AnalysisError(
            "the linear response is not finite: a sine sits on an undamped resonance of the "
            "model, or the model is unstable enough to overflow over this time span; check "
            "model.poles() and shorten t_end.")
    return y


class _Plan(NamedTuple):
    """The time structure of one response, in numpy, padded to bucket sizes."""

    held: tuple[bool, ...]  # per stimulus: held linearly (True) or sines in closed form
    cuts: np.ndarray  # (n_seg + 1,) cut times; padding repeats the last one
    lengths: np.ndarray  # (n_len,) representative segment lengths; the last is 0
    seg: np.ndarray  # (n_seg,) length index per segment
    on_grid: np.ndarray  # (n_out,) cut index of each output time
    t: np.ndarray  # (n_out,) output times, padded with the last one
    # one row per tone (padded with silent tones): input index, rad/s, phase
    # (rad), t0 (s), index of the cut where it starts
    tone_input: np.ndarray
    tone_w: np.ndarray
    tone_phase: np.ndarray
    tone_t0: np.ndarray
    tone_start: np.ndarray


def _plan(stimuli, index, t: np.ndarray, method: str) -> _Plan:
    if method == "grid":
        held = (True,) * len(stimuli)
        cuts = np.unique(np.concatenate([[0.0], t]))
        spec = []
    else:
        held = tuple(tones(s) is None for s in stimuli)
        edges = [e for s, h in zip(stimuli, held, strict=True) if h for e in s.edges(float(t[-1]))]
        spec = [(i, 2 * math.pi * f, ph, t0) for s, i, h in zip(stimuli, index, held, strict=True)
                if not h for (_, f, ph, t0) in tones(s)]
        cuts = _cuts(t, edges + [max(row[3], 0.0) for row in spec])
    # the cut that stands for each tone's start (a tone starting after t_end
    # is silenced by a zero amplitude in _stimulus_values)
    start = [int(np.argmin(np.abs(cuts - max(row[3], 0.0)))) for row in spec]
    h = np.diff(cuts)
    lengths, seg = _group_lengths(h) if h.size else (np.zeros(0), np.zeros(0, dtype=np.int32))
    # Pad to power-of-two sizes so that new grids reuse compiled programs; a
    # zero length propagates as the identity, so padded segments do nothing.
    n_len = _bucket(lengths.size + 1, 2)
    n_seg = _bucket(h.size, 16)
    n_out = _bucket(t.size, 16)
    n_tone = _bucket(len(spec), 1)
    spec = np.asarray(spec + [(0, 0.0, 0.0, 0.0)] * (n_tone - len(spec)), dtype=float)
    return _Plan(
        held=held,
        cuts=np.concatenate([cuts, np.full(n_seg - h.size, cuts[-1])]),
        lengths=np.concatenate([lengths, np.zeros(n_len - lengths.size)]),
        seg=np.concatenate([seg, np.full(n_seg - h.size, n_len - 1)]).astype(np.int32),
        on_grid=np.concatenate([np.searchsorted(cuts, t), np.full(n_out - t.size, cuts.size - 1)]),
        t=np.concatenate([t, np.full(n_out - t.size, t[-1])]),
        tone_input=spec[:, 0].astype(np.int32), tone_w=spec[:, 1], tone_phase=spec[:, 2],
        tone_t0=spec[:, 3], tone_start=np.asarray(start + [0] * (n_tone - len(start)), np.int32),
    )


@eqx.filter_jit
def _stimulus_values(stimuli, index, m, held, method, cuts, t):
    """Held inputs at the segment ends, all inputs on `t`, and the tone amplitudes."""
    held_s = tuple(s for s, h in zip(stimuli, held, strict=True) if h)
    held_i = tuple(i for i, h in zip(index, held, strict=True) if h)
    h = cuts[1:] - cuts[:-1]
    if method == "grid":
        u = _deviation(held_s, held_i, m, cuts)
        ua, ub = u[:-1], u[1:]
    else:
        # One-sided end values from two interior samples: exact for a straight
        # piece, and never a sample of a jump.
        u1 = _deviation(held_s, held_i, m, cuts[:-1] + h / 3.0)
        u2 = _deviation(held_s, held_i, m, cuts[:-1] + 2.0 * h / 3.0)
        ua, ub = 2.0 * u1 - u2, 2.0 * u2 - u1
    amps = [a * (max(t0, 0.0) <= t[-1]) for s, hh in zip(stimuli, held, strict=True) if not hh
            for (a, _, _, t0) in tones(s)]
    amp = jnp.stack(amps) if amps else jnp.zeros(1)
    return ua, ub, _deviation(stimuli, index, m, t), amp


@jax.jit
def _respond(A, B, C, D, ua, ub, u_t, amp, tone_input, tone_w, tone_phase, tone_t0,
             tone_start, lengths, seg, on_grid, t):
    """Output deviations on the padded grid `t`; one program per padded shape."""
    r, m = B.shape
    y_direct = u_t @ D.T
    if r == 0:
        return y_direct
    n_tone = tone_w.shape[0]
    amp = jnp.concatenate([amp, jnp.zeros(n_tone - amp.shape[0])])

    # Sines: steady-state phasor x_p plus the free response that cancels it at the start.
    def phasor(i, w):
        b = B @ jax.nn.one_hot(i, m, dtype=B.dtype)
        return jnp.linalg.solve(1j * w * jnp.eye(r) - A, b.astype(jnp.complex128))

    X = jax.vmap(phasor)(tone_input, tone_w)  # (n_tone, r)

    def x_p(tt):  # (n_tone, len(tt), r)
        rot = jnp.exp(1j * (tone_w[:, None] * (tt[None, :] - tone_t0[:, None])
                            + tone_phase[:, None]))
        return amp[:, None, None] * jnp.imag(rot[:, :, None] * X[:, None, :])

    t_start = jnp.maximum(tone_t0, 0.0)
    at_start = jax.vmap(lambda k: jnp.arange(ua.shape[0] + 1) == k)(tone_start)  # (n_tone, n_cut)
    x_start = jax.vmap(lambda X_k, a_k, w_k, ph_k, t0_k, ts_k: a_k * jnp.imag(
        jnp.exp(1j * (w_k * (ts_k - t0_k) + ph_k)) * X_k))(X, amp, tone_w, tone_phase,
                                                           tone_t0, t_start)  # (n_tone, r)
    inject = -jnp.einsum("kc,kr->cr", at_start.astype(float), x_start)
    active = on_grid[None, :] >= tone_start[:, None]  # (n_tone, n_out)
    particular = jnp.sum(jnp.where(active[:, :, None], x_p(t), 0.0), axis=0)

    Phi, Ga, Gb = hold_propagators(A, B, lengths)
    x_cuts = _march(Phi, Ga, Gb, seg, ua, ub, inject)
    return (x_cuts[on_grid] + particular) @ C.T + y_direct

"""Stimuli: deviations of one System input from its operating-point value.

A stimulus is a small immutable equinox Module.  Calling it at a time t
(seconds) gives the deviation of the input it drives, as a pure JAX scalar, so
it works under jit, vmap and grad.  Its timing (start, widths, frequencies,
break points) is static: it decides the edges handed to the step controller
and the shape of the compiled program.  Its amplitude is an array leaf, so
`scaled` (an amplitude search) never recompiles.

Every stimulus knows its *edges*: the times where its value or its slope
jumps.  An error-controlled integrator that steps across such a time without
stopping there loses accuracy or wastes steps rejecting; given the edges it
stops on them (diffrax `jump_ts`), and an exact linear response can integrate
piece by piece.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from fractions import Fraction
from typing import Any

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np

from .._errors import ParameterError, did_you_mean

# A sum of tones is called periodic only when its common period is at most this
# many periods of its slowest tone: beyond that the "period" is a numerical
# accident of the frequencies' decimal digits, not something one can simulate.
_MAX_PERIOD_RATIO = 1000


def _amplitude(name: str, value) -> jax.Array:
    a = jnp.asarray(value, dtype=jnp.float64)
    if a.ndim != 0:
        raise ParameterError(f"{name} must be a scalar amplitude, got shape {a.shape}.")
    return a


def _time(name: str, value, *, positive: bool = False, allow_zero: bool = True) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a number of seconds, got {value!r}.") from None
    if not math.isfinite(v):
        raise ParameterError(f"{name} must be finite, got {v}.")
    if positive and (v < 0 or (v == 0 and not allow_zero)):
        raise ParameterError(f"{name} must be {'> 0' if not allow_zero else '>= 0'} s, got {v}.")
    return v


def _frequency(name: str, value) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a frequency in Hz, got {value!r}.") from None
    if not (math.isfinite(v) and v > 0):
        raise ParameterError(f"{name} must be a positive, finite frequency in Hz, got {v}.")
    return v


def _check_input(name) -> str:
    if not isinstance(name, str) or not name:
        raise ParameterError(f"a stimulus needs the name of the input it drives, got {name!r}.")
    return name


class AbstractStimulus(eqx.Module):
    """The deviation of one System input from its operating-point value.

    Subclasses are final: `Step`, `Pulse`, `Sine`, `SumOfSines`,
    `PiecewiseLinear`, `FromFunction`.
    """

    input: eqx.AbstractVar[str]

    def __call__(self, t) -> jax.Array:
        """Deviation of the input at time `t` (seconds), a float64 scalar."""
        raise NotImplementedError

    def edges(self, t_end: float | None = None) -> tuple[float, ...]:
        """Times (s) where the value or the slope jumps, sorted, no repeats.

        **Arguments:**

        - `t_end`: for a periodic stimulus with edges, list them up to this time;
          without it, the edges of the first period only.
        """
        raise NotImplementedError

    def scaled(self, factor) -> AbstractStimulus:
        """The same waveform with its amplitude multiplied by `factor` (no recompile)."""
        raise NotImplementedError

    @property
    def period(self) -> float | None:
        """The period (s) when the stimulus is periodic, else None."""
        return None


class Step(AbstractStimulus):
    """A step of `amplitude` at `t0` (s): 0 before, `amplitude` from `t0` on."""

    input: str = eqx.field(static=True)
    amplitude: jax.Array
    t0: float = eqx.field(static=True)

    def __init__(self, input: str, amplitude, t0: float = 0.0):
        self.input = _check_input(input)
        self.amplitude = _amplitude("Step amplitude", amplitude)
        self.t0 = _time("Step t0", t0)

    def __call__(self, t):
        t = jnp.asarray(t, dtype=jnp.float64)
        return jnp.where(t >= self.t0, self.amplitude, 0.0)

    def edges(self, t_end=None):
        return (self.t0,)

    def scaled(self, factor):
        return eqx.tree_at(lambda s: s.amplitude, self, self.amplitude * factor)


class Pulse(AbstractStimulus):
    """A trapezoidal pulse, once or repeated.

    From `t0` the input rises linearly over `rise` to `amplitude`, stays there
    for `width`, falls linearly over `fall` back to 0 (all in seconds).  With
    `period` the pulse repeats every `period` s from `t0` on
    (`period >= rise + width + fall`).
    """

    input: str = eqx.field(static=True)
    amplitude: jax.Array
    t0: float = eqx.field(static=True)
    width: float = eqx.field(static=True)
    rise: float = eqx.field(static=True)
    fall: float = eqx.field(static=True)
    repeat: float | None = eqx.field(static=True)

    def __init__(self, input: str, amplitude, t0: float, width: float, rise: float = 0.0,
                 fall: float = 0.0, period: float | None = None):
        self.input = _check_input(input)
        self.amplitude = _amplitude("Pulse amplitude", amplitude)
        self.t0 = _time("Pulse t0", t0)
        self.width = _time("Pulse width", width, positive=True)
        self.rise = _time("Pulse rise", rise, positive=True)
        self.fall = _time("Pulse fall", fall, positive=True)
        if period is not None:
            period = _time("Pulse period", period, positive=True, allow_zero=False)
            if period < self.rise + self.width + self.fall:
                raise ParameterError(
                    f"Pulse period {period:g} s is shorter than rise + width + fall = "
                    f"{self.rise + self.width + self.fall:g} s; lengthen the period or shorten "
                    "the pulse.")
        self.repeat = period

    @property
    def period(self):
        return self.repeat

    def _shape(self, tau):
        """The pulse at local time tau >= 0 within one repetition."""
        a = self.amplitude
        t1 = self.rise
        t2 = t1 + self.width
        t3 = t2 + self.fall
        # where() on both branches; the divisions are guarded so a zero rise or
        # fall gives a clean jump and no NaN in the gradient.
        up = jnp.clip(tau / self.rise, 0.0, 1.0) if self.rise > 0 else jnp.where(tau >= 0, 1.0, 0.0)
        down = (jnp.clip((t3 - tau) / self.fall, 0.0, 1.0) if self.fall > 0
                else jnp.where(tau < t3, 1.0, 0.0))
        level = jnp.where(tau < t2, up, down)
        return a * jnp.where(tau < 0, 0.0, level)

    def __call__(self, t):
        t = jnp.asarray(t, dtype=jnp.float64)
        tau = t - self.t0
        if self.repeat is not None:
            tau = jnp.where(tau >= 0, jnp.mod(tau, self.repeat), tau)
        return self._shape(tau)

    def _one(self, start):
        return (start, start + self.rise, start + self.rise + self.width,
                start + self.rise + self.width + self.fall)

    def edges(self, t_end=None):
        if self.repeat is None:
            return _tidy(self._one(self.t0))
        stop = self.t0 + self.repeat if t_end is None else float(t_end)
        times = []
        k = 0
        while True:
            start = self.t0 + k * self.repeat
            if start > stop:
                break
            times.extend(self._one(start))
            k += 1
            if k > 1_000_000:
                raise ParameterError(
                    f"Pulse period {self.repeat:g} s gives more than a million pulses before "
                    f"{stop:g} s; shorten the simulation or lengthen the period.")
        return _tidy(t for t in times if t <= stop)

    def scaled(self, factor):
        return eqx.tree_at(lambda s: s.amplitude, self, self.amplitude * factor)


class Sine(AbstractStimulus):
    """``amplitude * sin(2 pi f_hz (t - t0) + phase)`` from `t0` on, 0 before.

    The phase is in degrees.  The slope (and, with a phase, the value) jumps at
    `t0`, which is its one edge.
    """

    input: str = eqx.field(static=True)
    amplitude: jax.Array
    f_hz: float = eqx.field(static=True)
    phase_deg: float = eqx.field(static=True)
    t0: float = eqx.field(static=True)

    def __init__(self, input: str, amplitude, f_hz: float, phase_deg: float = 0.0,
                 t0: float = 0.0):
        self.input = _check_input(input)
        self.amplitude = _amplitude("Sine amplitude", amplitude)
        self.f_hz = _frequency("Sine f_hz", f_hz)
        self.phase_deg = _time("Sine phase_deg", phase_deg)
        self.t0 = _time("Sine t0", t0)

    @property
    def period(self):
        return 1.0 / self.f_hz

    def __call__(self, t):
        t = jnp.asarray(t, dtype=jnp.float64)
        arg = 2 * jnp.pi * self.f_hz * (t - self.t0) + jnp.deg2rad(self.phase_deg)
        return jnp.where(t >= self.t0, self.amplitude * jnp.sin(arg), 0.0)

    def edges(self, t_end=None):
        return (self.t0,)

    def scaled(self, factor):
        return eqx.tree_at(lambda s: s.amplitude, self, self.amplitude * factor)


class SumOfSines(AbstractStimulus):
    """``sum_k amplitudes[k] * sin(2 pi f_hz[k] t + phases[k])`` at all times.

    Phases in degrees (default 0).  The tones are on for all t (no start edge),
    so the deviation at t = 0 is the sum of ``amplitudes * sin(phases)``.  The
    stimulus is periodic when the frequencies are commensurate (rational ratios
    with a common period of at most 1000 periods of the slowest tone).
    """

    input: str = eqx.field(static=True)
    amplitudes: jax.Array
    f_hz: tuple[float, ...] = eqx.field(static=True)
    phases_deg: tuple[float, ...] = eqx.field(static=True)

    def __init__(self, input: str, amplitudes: Sequence[Any], f_hz: Sequence[float],
                 phases_deg: Sequence[float] | None = None):
        self.input = _check_input(input)
        amps = jnp.asarray(amplitudes, dtype=jnp.float64)
        if amps.ndim != 1 or amps.shape[0] == 0:
            raise ParameterError(f"SumOfSines amplitudes must be a non-empty 1-D sequence, got "
                                 f"shape {amps.shape}.")
        freqs = tuple(_frequency("SumOfSines f_hz", f) for f in np.atleast_1d(f_hz))
        if len(freqs) != amps.shape[0]:
            raise ParameterError(f"SumOfSines has {amps.shape[0]} amplitudes but {len(freqs)} "
                                 "frequencies; give one frequency per amplitude.")
        phases = (0.0,) * len(freqs) if phases_deg is None else tuple(
            _time("SumOfSines phases_deg", ph) for ph in np.atleast_1d(phases_deg))
        if len(phases) != len(freqs):
            raise ParameterError(f"SumOfSines has {len(freqs)} tones but {len(phases)} phases.")
        self.amplitudes = amps
        self.f_hz = freqs
        self.phases_deg = phases

    @property
    def period(self):
        return _common_period(self.f_hz)

    def __call__(self, t):
        t = jnp.asarray(t, dtype=jnp.float64)
        w = 2 * jnp.pi * jnp.asarray(self.f_hz)
        ph = jnp.deg2rad(jnp.asarray(self.phases_deg))
        return jnp.sum(self.amplitudes * jnp.sin(w * t + ph))

    def edges(self, t_end=None):
        return ()

    def scaled(self, factor):
        return eqx.tree_at(lambda s: s.amplitudes, self, self.amplitudes * factor)


class PiecewiseLinear(AbstractStimulus):
    """Straight lines through (times[k], values[k]); held constant outside.

    `times` (s) must not decrease; a repeated time makes a jump (the later value
    holds from that time on).  `values` are deviations from the operating
    point.  Every break point is an edge.
    """

    input: str = eqx.field(static=True)
    times: tuple[float, ...] = eqx.field(static=True)
    values: jax.Array

    def __init__(self, input: str, times: Sequence[float], values: Sequence[Any]):
        self.input = _check_input(input)
        ts = tuple(_time("PiecewiseLinear times", t) for t in np.atleast_1d(times))
        vals = jnp.asarray(values, dtype=jnp.float64)
        if vals.ndim != 1 or vals.shape[0] != len(ts) or not ts:
            raise ParameterError(f"PiecewiseLinear needs as many values as times (non-empty "
                                 f"1-D); got {len(ts)} times and values of shape {vals.shape}.")
        if any(b < a for a, b in zip(ts, ts[1:], strict=False)):
            raise ParameterError("PiecewiseLinear times must not decrease; sort them (a repeated "
                                 "time makes a jump).")
        self.times = ts
        self.values = vals

    def __call__(self, t):
        t = jnp.asarray(t, dtype=jnp.float64)
        v = self.values
        if len(self.times) == 1:
            return v[0] + 0.0 * t
        ts = jnp.asarray(self.times)
        k = len(self.times)
        # the last break point at or before t: with repeated times this picks the
        # later one, so a zero-length segment is never interpolated across
        i = jnp.clip(jnp.searchsorted(ts, t, side="right") - 1, 0, k - 2)
        span = ts[i + 1] - ts[i]
        safe = jnp.where(span > 0, span, 1.0)
        inside = v[i] + (v[i + 1] - v[i]) * (t - ts[i]) / safe
        return jnp.where(t < ts[0], v[0], jnp.where(t >= ts[-1], v[-1], inside))

    def edges(self, t_end=None):
        return _tidy(self.times)

    def scaled(self, factor):
        return eqx.tree_at(lambda s: s.values, self, self.values * factor)


class FromFunction(AbstractStimulus):
    """Any JAX function of time: deviation = ``scale * fn(t)``.

    `fn` takes a float64 scalar time (s) and returns a scalar; it must be pure
    JAX.  Give its discontinuities as `edges` (s) so the integrator stops on
    them, and its `period` (s) if it has one.  `scaled` multiplies `scale`, an
    array leaf, so the same `fn` is never retraced for a new amplitude.
    """

    input: str = eqx.field(static=True)
    fn: Callable[[Any], Any] = eqx.field(static=True)
    scale: jax.Array
    edge_times: tuple[float, ...] = eqx.field(static=True)
    repeat: float | None = eqx.field(static=True)

    def __init__(self, input: str, fn: Callable[[Any], Any], edges: Sequence[float] = (),
                 period: float | None = None, scale=1.0):
        self.input = _check_input(input)
        if not callable(fn):
            raise ParameterError(f"FromFunction needs a function of time, got {fn!r}.")
        self.fn = fn
        self.scale = _amplitude("FromFunction scale", scale)
        self.edge_times = _tidy(_time("FromFunction edges", e) for e in edges)
        self.repeat = None if period is None else _time("FromFunction period", period,
                                                        positive=True, allow_zero=False)

    @property
    def period(self):
        return self.repeat

    def __call__(self, t):
        t = jnp.asarray(t, dtype=jnp.float64)
        out = jnp.asarray(self.fn(t), dtype=jnp.float64)
        if out.shape != ():
            raise ParameterError(f"FromFunction for input {self.input!r} must return a scalar, "
                                 f"got shape {out.shape}.")
        return self.scale * out

    def edges(self, t_end=None):
        return self.edge_times

    def scaled(self, factor):
        return eqx.tree_at(lambda s: s.scale, self, self.scale * factor)


# -- helpers shared by simulate, the linear response and the searches ----------

def _tidy(times) -> tuple[float, ...]:
    return tuple(sorted({float(t) for t in times}))


def _common_period(freqs: Sequence[float]) -> float | None:
    """The common period of commensurate tones, or None."""
    fr = [Fraction(f).limit_denominator(1_000_000) for f in freqs]
    if any(abs(float(a) - f) > 1e-12 * f for a, f in zip(fr, freqs, strict=True)):
        return None
    num = 0
    den = 1
    for f in fr:  # gcd of rationals: gcd of numerators over lcm of denominators
        den = den * f.denominator // math.gcd(den, f.denominator)
    for f in fr:
        num = math.gcd(num, f.numerator * (den // f.denominator))
    fundamental = Fraction(num, den)
    period = float(1 / fundamental)
    if period > _MAX_PERIOD_RATIO / min(freqs):
        return None
    return period


def as_stimuli(system, stimulus, *, allow_empty: bool = False) -> tuple[AbstractStimulus, ...]:
    """Validate `stimulus` (one or a tuple/list) against the System's inputs.

    With `allow_empty`, None or () means "no stimulus" (a free response).

    **Returns:** a tuple of stimuli.

    **Raises:** `ParameterError` for something that is not a stimulus, or an
    input name the System does not have (with the closest valid names).
    """
    if allow_empty and (stimulus is None or (isinstance(stimulus, (tuple, list))
                                             and not stimulus)):
        return ()
    items = (stimulus,) if isinstance(stimulus, AbstractStimulus) else stimulus
    if not isinstance(items, (tuple, list)) or not items:
        raise ParameterError(
            "stimulus must be an adlin.stimuli stimulus (Step, Pulse, Sine, SumOfSines, "
            f"PiecewiseLinear, FromFunction) or a non-empty tuple of them, got {stimulus!r}.")
    for s in items:
        if not isinstance(s, AbstractStimulus):
            raise ParameterError(f"{s!r} is not a stimulus; use one of adlin.stimuli's classes "
                                 "(FromFunction wraps any JAX function of time).")
        if s.input not in system.inputs:
            raise ParameterError(f"stimulus drives unknown input {s.input!r}: "
                                 f"{did_you_mean(s.input, system.inputs)}.")
    return tuple(items)


def input_deviation(system, stimulus, t) -> jax.Array:
    """Deviation of every input of `system` at time `t` (s): a (m,) float64 vector.

    Stimuli on the same input add; None or () gives zeros.  Jit-able (the
    stimulus is a pytree argument).
    """
    items = as_stimuli(system, stimulus, allow_empty=True)
    m = len(system.inputs)
    dev = jnp.zeros(m, dtype=jnp.float64)
    for s in items:
        # one-hot add instead of a scatter (see DEVELOPERS.md: scatter-adds in
        # batched programs misbehaved on this jaxlib)
        onehot = np.zeros(m)
        onehot[system.inputs.index(s.input)] = 1.0
        dev = dev + jnp.asarray(onehot) * s(t)
    return dev


def stimulus_edges(stimulus, t_start: float, t_end: float) -> tuple[float, ...]:
    """Edges of all stimuli strictly inside (t_start, t_end), sorted."""
    items = (stimulus,) if isinstance(stimulus, AbstractStimulus) else tuple(stimulus or ())
    out = set()
    for s in items:
        out.update(e for e in s.edges(t_end) if t_start < e < t_end)
    return tuple(sorted(out))


def stimulus_period(stimulus) -> float | None:
    """The common period of one stimulus or a tuple of them, or None."""
    items = (stimulus,) if isinstance(stimulus, AbstractStimulus) else tuple(stimulus)
    periods = [s.period for s in items]
    if not periods or any(p is None for p in periods):
        return None
    if len(periods) == 1:
        return periods[0]
    return _common_period([1.0 / p for p in periods])


def scale_all(stimulus, factor):
    """Scale one stimulus or every stimulus of a tuple."""
    if isinstance(stimulus, AbstractStimulus):
        return stimulus.scaled(factor)
    return tuple(s.scaled(factor) for s in stimulus)


__all__ = [
    "AbstractStimulus", "Step", "Pulse", "Sine", "SumOfSines", "PiecewiseLinear", "FromFunction",
    "as_stimuli", "input_deviation", "stimulus_edges", "stimulus_period", "scale_all",
]


"""The tone that drives a distortion measurement, with its frequency as data.

`adlin.stimuli.Sine` keeps its frequency static (part of the compiled
program), which is right for a single transient but makes a distortion study
compile one transient program per frequency (15-30 s each on a 2-core CPU).
Here both amplitude and frequency are array leaves, so one program serves a
whole sweep of amplitudes and frequencies.
"""

from __future__ import annotations

import equinox as eqx
import jax
import jax.numpy as jnp

from .._transient.stimuli import AbstractStimulus


class DistortionTone(AbstractStimulus):
    """``amplitude * sin(2 pi f_hz t)`` for t >= 0 (the tone of `adlin.distortion`).

    Its only edge is t = 0, where the slope jumps (the value starts at 0).

    **Arguments:**

    - `input`: name of the driven input.
    - `amplitude`: peak deviation (input units).
    - `f_hz`: frequency (Hz); may be traced.
    """

    input: str = eqx.field(static=True)
    amplitude: jax.Array
    f_hz: jax.Array

    def __init__(self, input: str, amplitude, f_hz):
        self.input = input
        self.amplitude = jnp.asarray(amplitude, dtype=jnp.float64)
        self.f_hz = jnp.asarray(f_hz, dtype=jnp.float64)

    def __call__(self, t):
        t = jnp.asarray(t, dtype=jnp.float64)
        return jnp.where(t >= 0.0, self.amplitude * jnp.sin(2 * jnp.pi * self.f_hz * t), 0.0)

    def edges(self, t_end=None):
        return (0.0,)

    def scaled(self, factor):
        return eqx.tree_at(lambda s: s.amplitude, self, self.amplitude * factor)

    @property
    def period(self):
        return 1.0 / float(self.f_hz)

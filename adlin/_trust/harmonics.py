"""Harmonic amplitudes of a periodic waveform by coherent sampling and the FFT.

When the record holds exactly P periods sampled N times per period (the end
point left out), harmonic k of the waveform falls exactly on FFT bin k P and no
window is needed: there is no leakage, and every other bin holds only what is
not periodic in the record (left-over settling, solver error), which gives the
measurement's own noise floor (Oppenheim & Schafer, Discrete-Time Signal
Processing, 3rd ed., 2010, sec. 10.2 on the DFT of sinusoids; from memory).
"""

from __future__ import annotations

import equinox as eqx
import jax.numpy as jnp
import numpy as np
from jaxtyping import Array, Float

from .._errors import AnalysisError


class HarmonicSpectrum(eqx.Module):
    """Amplitudes of harmonics 0..H of a coherently sampled periodic record.

    - `amplitudes`: (H + 1,) entry 0 is the mean (DC, signed), entry k >= 1
      the peak amplitude of the k-th harmonic, in the waveform's units.
    - `phases`: (H + 1,) phases (rad) of cos(k w t + phase) at the record's
      first sample.
    - `noise_floor`: the largest amplitude in a bin that is not a harmonic
      (relative to the fundamental): what the record holds that is not
      periodic; harmonics below it are not resolved.
    - `period_change`: max |y(last period) - y(period before)| relative to the
      fundamental amplitude (how far the waveform was from periodic).
    """

    amplitudes: Float[Array, " h"]
    phases: Float[Array, " h"]
    noise_floor: Float[Array, ""]
    period_change: Float[Array, ""]

    @property
    def fundamental(self):
        return self.amplitudes[1]

    def hd(self, k: int):
        """Harmonic distortion HDk = |harmonic k| / |fundamental|."""
        return self.amplitudes[k] / self.amplitudes[1]

    def thd(self):
        """sqrt(sum_{k >= 2} |harmonic k|^2) / |fundamental| over the measured harmonics."""
        return jnp.sqrt(jnp.sum(self.amplitudes[2:] ** 2)) / self.amplitudes[1]


def coherent_spectrum(y, periods: int, samples_per_period: int,
                      n_harmonics: int = 9) -> HarmonicSpectrum:
    """Harmonics of a record of exactly `periods` periods, `samples_per_period` each.

    **Arguments:**

    - `y`: samples y(t0 + i T / N), i = 0 .. periods * N - 1 (1-D).
    - `periods`: whole periods in the record (>= 2, so that the last two can
      be compared).
    - `samples_per_period`: N; must exceed 2 `n_harmonics` (Nyquist).
    - `n_harmonics`: highest harmonic reported.

    **Returns:** a `HarmonicSpectrum`.

    **Raises:** `AnalysisError` when the record's length does not match or the
    sampling is too coarse for the harmonics asked for.
    """
    periods, N = int(periods), int(samples_per_period)
    if periods < 2:
        raise AnalysisError(f"the record needs at least 2 whole periods, got {periods}.")
    if N <= 2 * n_harmonics:
        raise AnalysisError(f"{N} samples per period cannot resolve harmonic {n_harmonics}; "
                            f"use more than {2 * n_harmonics}.")
    y = jnp.asarray(y, dtype=jnp.float64)
    if y.shape != (periods * N,):
        raise AnalysisError(f"the record has shape {y.shape}, expected ({periods * N},) for "
                            f"{periods} periods of {N} samples.")
    spec = jnp.fft.rfft(y) / y.shape[0]
    bins = periods * np.arange(n_harmonics + 1)
    c = spec[bins]
    # entry 0 keeps its sign (the mean), the others are peak amplitudes
    amps = jnp.concatenate([jnp.real(c[:1]), 2.0 * jnp.abs(c[1:])])
    fundamental = amps[1]
    other = np.ones(spec.shape[0], dtype=bool)
    other[::periods] = False  # every harmonic bin, also those above n_harmonics
    floor = 2.0 * jnp.max(jnp.where(jnp.asarray(other), jnp.abs(spec), 0.0)) / fundamental
    last, before = y[-N:], y[-2 * N:-N]
    change = jnp.max(jnp.abs(last - before)) / fundamental
    return HarmonicSpectrum(amplitudes=amps, phases=jnp.angle(c), noise_floor=floor,
                            period_change=change)

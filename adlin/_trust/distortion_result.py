"""Distortion: predicted and measured harmonic distortion side by side."""

from __future__ import annotations

import equinox as eqx
import numpy as np
from jaxtyping import Array, Float, Int

from .volterra import HarmonicKernels


class MeasurementSettings(eqx.Module):
    """How the measured side was obtained (one entry per amplitude where it varies).

    - `periods_simulated`, `periods_discarded`, `periods_measured`,
      `samples_per_period`: the record (coherent sampling, no window).
    - `slowest_time_constant_s`: 1 / min |Re p| over the small-signal poles,
      which sets the settling discarded (0 for a model without poles).
    - `settle_time_s`: time simulated before the record.
    - `rtol`: the accuracy asked of each measured HDk, relative to the
      fundamental (`DistortionOptions.rtol`).
    - `steps`, `rejected_steps`: the solver's steps per amplitude (last run).
    - `steps_per_sample`: m per amplitude: the transient took equal steps of
      T / (N m), refined by halving until HDk stopped moving.
    - `harmonic_error`: per amplitude, the largest change of an HDk at the
      last halving of the steps (the measurement's error estimate; inf when
      the plan could not be refined).
    """

    periods_simulated: int = eqx.field(static=True)
    periods_discarded: int = eqx.field(static=True)
    periods_measured: int = eqx.field(static=True)
    samples_per_period: int = eqx.field(static=True)
    slowest_time_constant_s: float = eqx.field(static=True)
    settle_time_s: float = eqx.field(static=True)
    rtol: float = eqx.field(static=True)
    steps: Int[Array, " a"]
    rejected_steps: Int[Array, " a"]
    steps_per_sample: Int[Array, " a"]
    harmonic_error: Float[Array, " a"]


class Distortion(eqx.Module):
    """Harmonic distortion of one output for a sine on one input.

    Predicted: leading-order Volterra (harmonic-input) values from the second
    and third derivatives of the model at the operating point (see
    `HarmonicKernels`); HD2 grows as a, HD3 as a^2, and THD is
    sqrt(HD2^2 + HD3^2) (harmonics 4 and up are neglected in the prediction).
    Measured: FFT of the periodic steady state of the nonlinear transient,
    coherently sampled; THD over harmonics 2 .. n.

    **Fields** (arrays have one entry per amplitude):

    - `amplitude`: input amplitudes (peak, in the input's units).
    - `f_hz`: tone frequency (Hz).  `input`, `output`: names.
    - `predicted_hd2`, `predicted_hd3`, `predicted_thd`: leading-order values.
    - `predicted_dc_shift`: shift of the output's mean (a^2 Y20).
    - `measured_hd2`, `measured_hd3`, `measured_thd`: from the transient, or
      None when `measure=False`.
    - `harmonics`: (a, n + 1) measured amplitudes of the output: entry 0 the
      shift of its mean from the operating point, entry k the k-th harmonic.
    - `noise_floor`: the largest non-harmonic FFT bin relative to the
      fundamental: the measurement's resolution for HDk.
    - `period_change`: max change between the last two periods, relative to
      the fundamental: how close the record was to periodic.
    - `settings`: a `MeasurementSettings`, or None.
    - `kernels`: the `HarmonicKernels` behind the prediction (its `hd2(a)`,
      `hd3(a)` give other amplitudes at no cost).
    - `notes`: sentences on where prediction and measurement part ways, and on
      amplitudes beyond the weakly nonlinear range.
    """

    amplitude: Float[Array, " a"]
    f_hz: float = eqx.field(static=True)
    input: str = eqx.field(static=True)
    output: str = eqx.field(static=True)
    predicted_hd2: Float[Array, " a"]
    predicted_hd3: Float[Array, " a"]
    predicted_thd: Float[Array, " a"]
    predicted_dc_shift: Float[Array, " a"]
    kernels: HarmonicKernels
    measured_hd2: Float[Array, " a"] | None = None
    measured_hd3: Float[Array, " a"] | None = None
    measured_thd: Float[Array, " a"] | None = None
    harmonics: Float[Array, "a h"] | None = None
    noise_floor: Float[Array, " a"] | None = None
    period_change: Float[Array, " a"] | None = None
    settings: MeasurementSettings | None = None
    notes: tuple[str, ...] = eqx.field(static=True, default=())

    @property
    def measured(self) -> bool:
        return self.measured_hd2 is not None

    @property
    def ratio_hd2(self):
        """Measured / predicted HD2 (None when not measured)."""
        return None if not self.measured else self.measured_hd2 / self.predicted_hd2

    @property
    def ratio_hd3(self):
        """Measured / predicted HD3 (None when not measured; inf where HD3 is predicted 0)."""
        if not self.measured:
            return None
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.asarray(self.measured_hd3) / np.asarray(self.predicted_hd3)

    def rows(self) -> list[dict[str, float]]:
        """One dict per amplitude: amplitude, predicted and measured HD2/HD3/THD, ratios."""
        out = []
        for i, a in enumerate(np.atleast_1d(np.asarray(self.amplitude))):
            row = {"amplitude": float(a), "f_hz": self.f_hz,
                   "predicted_hd2": float(self.predicted_hd2[i]),
                   "predicted_hd3": float(self.predicted_hd3[i]),
                   "predicted_thd": float(self.predicted_thd[i])}
            if self.measured:
                row.update(measured_hd2=float(self.measured_hd2[i]),
                           measured_hd3=float(self.measured_hd3[i]),
                           measured_thd=float(self.measured_thd[i]),
                           ratio_hd2=float(np.asarray(self.ratio_hd2)[i]),
                           ratio_hd3=float(np.asarray(self.ratio_hd3)[i]),
                           noise_floor=float(self.noise_floor[i]))
            out.append(row)
        return out

    def __str__(self) -> str:
        head = (f"distortion of {self.output} for a sine on {self.input} at "
                f"{self.f_hz:.4g} Hz (predicted: third-order Volterra; measured: FFT of the "
                "periodic transient)")
        cols = ["amplitude", "HD2 pred", "HD2 meas", "ratio", "HD3 pred", "HD3 meas", "ratio",
                "THD pred", "THD meas"]
        lines = [head, "  ".join(f"{c:>10}" for c in cols)]
        keys = ["amplitude", "predicted_hd2", "measured_hd2", "ratio_hd2", "predicted_hd3",
                "measured_hd3", "ratio_hd3", "predicted_thd", "measured_thd"]
        for r in self.rows():
            lines.append("  ".join(f"{r[k]:10.4g}" if k in r else f"{'-':>10}" for k in keys))
        if self.settings is not None:
            s = self.settings
            lines.append(f"record: {s.periods_measured} periods x {s.samples_per_period} samples "
                         f"after {s.periods_discarded} discarded (slowest time constant "
                         f"{s.slowest_time_constant_s:.3g} s); steps of T/"
                         f"{s.samples_per_period * int(np.max(np.asarray(s.steps_per_sample)))}, "
                         f"HDk error <= {float(np.max(np.asarray(s.harmonic_error))):.2g} "
                         f"(asked {s.rtol:g})")
        lines += [f"note: {n}" for n in self.notes]
        return "\n".join(lines)

"""adlin.distortion: harmonic distortion predicted at the operating point and measured.

The prediction is the leading-order Volterra (harmonic-input) answer from the
model's second and third derivatives (`volterra.py`); the measurement is the
FFT of the nonlinear transient's periodic steady state (`harmonics.py`).  The
two are reported side by side, with a note wherever they part ways.
"""

from __future__ import annotations

import math

import jax
import jax.numpy as jnp
import numpy as np

from .._errors import AnalysisError, ModelError, ParameterError, did_you_mean
from .._system import System
from .distortion_options import DistortionOptions
from .distortion_result import Distortion, MeasurementSettings
from .stable import least_stable_pole
from .volterra import HarmonicKernels, harmonic_kernels

# The measured harmonic is trusted when it stands this far above the record's
# noise floor (the largest bin that is not a harmonic).
RESOLVED_FACTOR = 10.0
# A record whose last two periods differ by more than this (relative to the
# fundamental) is reported as not settled.
PERIODIC_TOL = 1e-6


def _concrete(*values) -> bool:
    return not any(isinstance(v, jax.core.Tracer) for v in jax.tree_util.tree_leaves(values))


def _pick(kind: str, names: tuple[str, ...], name: str) -> int:
    if not isinstance(name, str) or name not in names:
        raise ParameterError(f"unknown {kind} {name!r}: {did_you_mean(str(name), names)}.")
    return names.index(name)


def _amplitudes(amplitude):
    a = jnp.atleast_1d(jnp.asarray(amplitude, dtype=jnp.float64))
    if a.ndim != 1 or a.shape[0] == 0:
        raise ParameterError(f"distortion amplitude must be a number or a 1-D sequence of them, "
                             f"got shape {a.shape}.")
    if _concrete(a):
        bad = ~np.isfinite(np.asarray(a)) | (np.asarray(a) <= 0)
        if bad.any():
            raise ParameterError(f"distortion amplitude must be finite and > 0 (a peak value in "
                                 f"the input's units), got {np.asarray(a)[bad][0]!r}.")
    return a


def _frequency(f_hz) -> float:
    try:
        f = float(f_hz)
    except (TypeError, ValueError):
        raise ParameterError(f"distortion f_hz must be one frequency in Hz (a number); got "
                             f"{f_hz!r}; call distortion once per frequency.") from None
    if not math.isfinite(f) or f <= 0:
        raise ParameterError(f"distortion f_hz must be finite and > 0, got {f_hz!r}.")
    return f


def distortion(
    system: System,
    op=None,
    *,
    input: str,
    output: str,
    amplitude,
    f_hz: float,
    measure: bool = True,
    options: DistortionOptions | None = None,
    inputs=None,
    params=None,
) -> Distortion:
    """HD2, HD3 and THD of `output` for a sine of `amplitude` on `input`, predicted and measured.

    Predicted: the harmonic-input Volterra method at the operating point
    (second and third derivatives of f, q, g by nested forward-mode AD;
    frequency-dependent when the circuit has memory).  Measured: a transient
    of the nonlinear model driven by ``amplitude * sin(2 pi f_hz t)``, started
    from the predicted periodic state, run until the slowest time constant has
    settled, then `measured_periods` whole periods sampled coherently and
    transformed by the FFT (no window).  The transient takes equal steps that
    divide the period (a periodic step plan), halved until no HDk moves by
    more than `options.rtol`; `settings` says which steps were used and the
    error estimate they leave.

    **Arguments:**

    - `system`: the model.
    - `op`: its `OperatingPoint` (default: `adlin.steady_state` at `inputs`,
      `params`).
    - `input`, `output`: names of the driven input and the observed output.
    - `amplitude`: peak amplitude of the sine (input units), a number or a
      1-D sequence (one prediction and one transient per amplitude).
    - `f_hz`: tone frequency in Hz (one per call).
    - `measure`: False gives the prediction alone; it is then a pure JAX
      function of the operating point and the amplitudes (jit, vmap, grad).
    - `options`: `DistortionOptions` for the measurement and the notes.
    - `inputs`, `params`: passed to `steady_state` when `op` is None.

    **Returns:** a `Distortion` (arrays with one entry per amplitude).

    **Raises:**

    - `ParameterError`: unknown input or output name, amplitude <= 0, bad
      frequency.
    - `AnalysisError`: the operating point is unstable or marginal (no
      periodic steady state to measure), the output does not respond to the
      input, or a harmonic falls on a pole on the imaginary axis.
    - `AdlinError` from `simulate` when the transient fails.
    """
    from .._steady.operating_point import OperatingPoint
    from .._steady.solve import steady_state

    if not isinstance(system, System):
        raise ModelError(f"distortion() needs an adlin.System, got {type(system).__name__}.")
    options = options if options is not None else DistortionOptions()
    if not isinstance(options, DistortionOptions):
        raise ParameterError(f"distortion options must be a DistortionOptions, got "
                             f"{type(options).__name__}.")
    i_in = _pick("input", system.inputs, input)
    i_out = _pick("output", system.outputs, output)
    f = _frequency(f_hz)
    a = _amplitudes(amplitude)
    if op is None:
        op = steady_state(system, inputs=inputs, params=params)
    elif not isinstance(op, OperatingPoint):
        raise ModelError(f"distortion() needs an OperatingPoint from adlin.steady_state, got "
                         f"{type(op).__name__}.")
    elif op.unknown_names != system.unknowns or op.param_names != system.param_names:
        raise ModelError(f"this operating point belongs to a model with unknowns "
                         f"{list(op.unknown_names)}, not to {system.name!r}.")

    kernels = harmonic_kernels(system, op, i_in, f)
    y1, y2, y3 = kernels.y1[i_out, 0], kernels.y2[i_out, 0], kernels.y3[i_out, 0]
    if _concrete(kernels, a):
        _check_kernels(y1, y2, y3, input, output, f)
    hd2 = a * jnp.abs(y2) / jnp.abs(y1)
    hd3 = a**2 * jnp.abs(y3) / jnp.abs(y1)
    result = Distortion(
        amplitude=a, f_hz=f, input=input, output=output,
        predicted_hd2=hd2, predicted_hd3=hd3, predicted_thd=jnp.sqrt(hd2**2 + hd3**2),
        predicted_dc_shift=a**2 * kernels.y20[i_out, 0], kernels=kernels,
    )
    if not measure:
        notes = _weak_notes(result, options) if _concrete(result) else ()
        return Distortion(**{**_fields(result), "notes": notes})
    if not _concrete(op, a):
        raise AnalysisError("distortion(measure=True) runs transients and needs concrete values; "
                            "under jit, vmap or grad use measure=False (the prediction alone).")
    return _measure(system, op, result, i_in, i_out, options)


def _fields(d: Distortion) -> dict:
    return {k: getattr(d, k) for k in d.__dataclass_fields__}


def _check_kernels(y1, y2, y3, input, output, f):
    vals = np.asarray([y1, y2, y3])
    if not np.all(np.isfinite(vals)):
        raise AnalysisError(f"the harmonic responses of {output!r} at {f:g} Hz (or 2x, 3x) are not "
                            "finite: a harmonic falls on a pole on the imaginary axis or the "
                            "model's derivatives are not finite there; move the frequency or check "
                            "the model at the operating point.")
    if abs(vals[0]) == 0.0:
        raise AnalysisError(f"output {output!r} does not respond to input {input!r} at {f:g} Hz "
                            "in the small-signal model, so its harmonic distortion is undefined; "
                            "choose an output that the input drives.")


def _weak_notes(d: Distortion, options: DistortionOptions) -> tuple[str, ...]:
    notes = []
    for a, thd in zip(np.asarray(d.amplitude), np.asarray(d.predicted_thd), strict=True):
        if thd > options.weak_limit:
            notes.append(f"at amplitude {a:.4g} the predicted THD is {100 * thd:.3g} %: beyond "
                         "the weakly nonlinear range, where a third-order prediction is not "
                         "expected to hold.")
    return tuple(notes)


def _slowest_time_constant(system: System, op, input: str) -> float:
    from .._linear.linearize import linearize

    poles = np.asarray(linearize(system, op).poles())
    if poles.size == 0:
        return 0.0
    worst = least_stable_pole(poles)
    if worst is not None:
        raise AnalysisError(
            f"the operating point has a pole at {worst:.4g} rad/s (not in the left half "
            f"plane), so a sine on {input!r} has no periodic steady state to measure; distortion "
            "needs a stable operating point (use measure=False for the prediction alone).")
    return float(1.0 / np.min(-poles.real))


def _warm_start(kernels: HarmonicKernels, op, a: float, thd: float, weak_limit: float):
    """The state at t = 0 of the predicted periodic response to a sin(w t).

    a sin(w t) = Re(a e^{-j pi/2} e^{jwt}); order k turns with e^{-jk pi/2}.
    Beyond the weakly nonlinear range the prediction is no guide: start at
    the operating point.
    """
    x = np.asarray(op.x)
    if thd > weak_limit:
        return jnp.asarray(x)
    k1, k2, k3 = (np.asarray(v[:, 0]) for v in (kernels.x1, kernels.x2, kernels.x3))
    rot = np.exp(-0.5j * np.pi)
    wave = 2.0 * np.real(a * rot * k1 + a**2 * rot**2 * k2 + a**3 * rot**3 * k3)
    return jnp.asarray(x + a**2 * np.asarray(kernels.x20[:, 0]) + wave)


def _dynamic_basis(system: System) -> np.ndarray:
    """P1: the transient's ODE state (dynamic coordinates) is P1 @ x."""
    from .._compile import compile
    from .._transient.simulate import reduced_field

    return np.asarray(reduced_field(compile(system)).P1)


def _measure(system, op, pred: Distortion, i_in, i_out, options: DistortionOptions) -> Distortion:
    from .._transient.simulate import simulate
    from .distortion_tone import DistortionTone
    from .periodic_record import STAGE_RTOL, periodic_record, stage_tolerance

    notes = list(_weak_notes(pred, options))
    tau = _slowest_time_constant(system, op, pred.input)
    period = 1.0 / pred.f_hz
    M, N = options.measured_periods, options.samples_per_period
    discard = max(1, math.ceil(options.settle_time_constants * tau / period))
    if discard + M > options.max_periods:
        discard = options.max_periods - M
        notes.append(f"settling for {options.settle_time_constants:g} time constants "
                     f"({options.settle_time_constants * tau:.3g} s) would take more than "
                     f"max_periods={options.max_periods} periods; only {discard} periods were "
                     "discarded (see period_change).")
    if (discard + M) * N * 2 > options.max_steps:
        raise ParameterError(f"distortion needs at least {(discard + M) * N * 2} steps per "
                             f"transient ({discard + M} periods of {N} samples, halved once) "
                             f"but DistortionOptions max_steps={options.max_steps}; raise "
                             "max_steps or lower max_periods or samples_per_period.")
    # The record's grid has the same shape at every frequency and settling, so
    # one transient program serves them all (dt, t_end and the grid are data).
    t_grid = (discard + np.arange(M * N) / N) * period
    t_end = (discard + M) * period

    records = []
    y_op = float(np.asarray(op.y)[i_out])
    P1 = _dynamic_basis(system)
    z_op = P1 @ np.asarray(op.x)
    z_swing = 2.0 * np.abs(P1 @ np.asarray(pred.kernels.x1[:, 0]))  # per unit amplitude
    for a, thd in zip(np.asarray(pred.amplitude), np.asarray(pred.predicted_thd), strict=True):
        x0 = _warm_start(pred.kernels, op, float(a), float(thd), options.weak_limit)
        atol = stage_tolerance(float(a) * z_swing, z_op, options.rtol)
        tone = DistortionTone(pred.input, float(a), pred.f_hz)

        def run(m, tone=tone, x0=x0, atol=atol):
            tr = simulate(system, tone, t_end, op=op, x0=x0, t=t_grid, rtol=STAGE_RTOL,
                          atol=atol, dt=period / (N * m), max_steps=options.max_steps)
            return np.asarray(tr.y)[:, i_out] - y_op, int(tr.steps), int(tr.rejected_steps)

        records.append(periodic_record(run, periods_total=discard + M, periods=M, samples=N,
                                       n_harmonics=options.n_harmonics, accuracy=options.rtol,
                                       max_steps=options.max_steps))
    harm = np.stack([np.asarray(r.spectrum.amplitudes) for r in records])
    m_hd2, m_hd3 = harm[:, 2] / harm[:, 1], harm[:, 3] / harm[:, 1]
    m_thd = np.sqrt(np.sum(harm[:, 2:] ** 2, axis=1)) / harm[:, 1]
    floors_a = np.asarray([float(r.spectrum.noise_floor) for r in records])
    changes_a = np.asarray([float(r.spectrum.period_change) for r in records])
    errors_a = np.asarray([r.harmonic_error for r in records])
    for a, r in zip(np.asarray(pred.amplitude), records, strict=True):
        if not r.converged:
            notes.append(f"at amplitude {a:.4g} the measured harmonics still moved by "
                         f"{r.harmonic_error:.2g} (of the fundamental) when the steps were halved "
                         f"to T/{N * r.steps_per_sample}, more than rtol={options.rtol:g}: "
                         "rounding, the step budget (max_steps) or a failure of the transient "
                         "with smaller steps limits the measurement; loosen rtol or raise "
                         "max_steps.")
    notes += _comparison_notes(pred, m_hd2, m_hd3, np.maximum(floors_a, errors_a), changes_a,
                               options)
    settings = MeasurementSettings(
        periods_simulated=discard + M, periods_discarded=discard, periods_measured=M,
        samples_per_period=N, slowest_time_constant_s=tau, settle_time_s=discard * period,
        rtol=options.rtol, steps=jnp.asarray([r.steps for r in records]),
        rejected_steps=jnp.asarray([r.rejected_steps for r in records]),
        steps_per_sample=jnp.asarray([r.steps_per_sample for r in records]),
        harmonic_error=jnp.asarray(errors_a),
    )
    return Distortion(**{
        **_fields(pred),
        "measured_hd2": jnp.asarray(m_hd2), "measured_hd3": jnp.asarray(m_hd3),
        "measured_thd": jnp.asarray(m_thd), "harmonics": jnp.asarray(harm),
        "noise_floor": jnp.asarray(floors_a), "period_change": jnp.asarray(changes_a),
        "settings": settings, "notes": tuple(notes),
    })


def _comparison_notes(pred, m_hd2, m_hd3, floors, changes, options) -> list[str]:
    notes = []
    amps = np.asarray(pred.amplitude)
    p_hd = {2: np.asarray(pred.predicted_hd2), 3: np.asarray(pred.predicted_hd3)}
    m_hd = {2: m_hd2, 3: m_hd3}
    for i, a in enumerate(amps):
        if changes[i] > PERIODIC_TOL:
            notes.append(f"at amplitude {a:.4g} the last two periods differ by {changes[i]:.2g} "
                         "of the fundamental: the record had not settled; raise "
                         "settle_time_constants or max_periods in DistortionOptions.")
        # A harmonic is resolved only well above the spectrum's noise floor, the
        # step-halving error estimate and the accuracy asked for: on a periodic step
        # plan the integration error repeats every period, so it lands on the
        # harmonic bins, not in the floor between them.
        resolution = RESOLVED_FACTOR * max(floors[i], options.rtol)
        for k in (2, 3):
            p, m = p_hd[k][i], m_hd[k][i]
            if max(p, m) < resolution:
                notes.append(f"at amplitude {a:.4g} HD{k} is below the measurement's resolution "
                             f"({resolution:.2g}): predicted {p:.3g}, measured {m:.3g}.")
                continue
            diff = abs(m - p) / max(p, m)
            if diff > options.part_ways:
                why = ("the amplitude is beyond the weakly nonlinear range"
                       if np.asarray(pred.predicted_thd)[i] > options.weak_limit else
                       "terms beyond third order, or a harmonic near a resonance, matter here")
                notes.append(f"at amplitude {a:.4g} HD{k} predicted {p:.4g} and measured {m:.4g} "
                             f"part ways by {100 * diff:.3g} % ({why}).")
    return notes

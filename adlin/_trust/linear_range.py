"""adlin.linear_range: the input amplitudes, per polarity, where the linear model holds.

For a stimulus shape (a step, or a sine at f_hz) of amplitude a on one input,
the error is max over the run of |y_nonlinear - y_linear| divided by the swing
of the linear response (the measure of `adlin.compare`).  The linear response
of amplitude a is a times that of amplitude 1 (computed once, exactly); only
the nonlinear transients depend on a.

The search is a bracketing search in log amplitude, each polarity on its own:
a geometric ladder from `amplitude_min` to `amplitude_max` (ratio `growth`)
finds the first amplitude whose error exceeds `tol`; the bracket
[last within, first beyond] is then cut by multisection in log amplitude (a
batch of geometrically spaced amplitudes per round, the batched form of
bisection) until its ratio is below 1 + `precision`.  Every batch of
amplitudes is one `jax.vmap` over `adlin.simulate`, so all transients of a
round run in one compiled program and each round has the same batch size
(one compilation).  The first crossing is reported; where the error falls back
below `tol` at larger amplitudes, a note says so.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import jax
import jax.numpy as jnp
import numpy as np

from .._errors import AnalysisError, ParameterError, did_you_mean
from .._system import System
from .linear_response import linear_response
from .range_result import LinearRange
from .stable import least_stable_pole

# Default run length and sine frequency, from the linear model's poles
# (common practice: a first-order response settles to 5e-5 within 10 time
# constants; a decade below the dominant pole the circuit is nearly static).
SETTLE_TIME_CONSTANTS = 10.0
SINE_DECADES_BELOW_POLE = 1.0
SINE_PERIODS = 3.0
SAMPLES_PER_PERIOD = 100
MAX_POINTS = 20_001
MAX_ROUNDS = 12


def _positive(name: str, value, *, above: float = 0.0, below: float = math.inf) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"{name} must be a number, got {value!r}.") from None
    if not (math.isfinite(v) and above < v < below):
        raise ParameterError(f"{name} must lie in ({above:g}, {below:g}), got {value!r}.")
    return v


def _timing(lin, kind: str, f_hz, t_end, n_points, notes: list[str]):
    """(f_hz, t_end, n_points) with defaults from the poles; notes say which were chosen."""
    poles = np.asarray(lin.poles())
    worst = least_stable_pole(poles)
    if worst is not None:
        raise AnalysisError(
            f"the operating point is not stable (pole at {worst:.4g} rad/s), so a transient "
            "from it does not stay near the bias and no linear range exists; move the bias or "
            "pick a stable steady state.")
    tau = 1.0 / float(np.min(-poles.real)) if poles.size else None
    if kind == "sine":
        if f_hz is None:
            if not poles.size:
                raise AnalysisError("the model has no storage (no poles), so there is no default "
                                    "frequency; pass f_hz.")
            f_hz = float(np.min(np.abs(poles))) / (2 * math.pi) / 10**SINE_DECADES_BELOW_POLE
            notes.append(f"f_hz = {f_hz:.4g} Hz: a decade below the slowest pole.")
        f_hz = _positive("f_hz", f_hz)
    if t_end is None:
        settle = SETTLE_TIME_CONSTANTS * tau if tau is not None else None
        if kind == "sine":
            t_end = max(settle or 0.0, SINE_PERIODS / f_hz)
            notes.append(f"t_end = {t_end:.4g} s: the longer of {SETTLE_TIME_CONSTANTS:g} slowest "
                         f"time constants and {SINE_PERIODS:g} periods.")
        elif settle is not None:
            t_end = settle
            notes.append(f"t_end = {t_end:.4g} s: {SETTLE_TIME_CONSTANTS:g} times the slowest "
                         f"time constant ({tau:.4g} s).")
        else:
            t_end = 1.0
            notes.append("the model has no storage, so the step response is static; t_end = 1 s.")
    t_end = _positive("t_end", t_end)
    if n_points is None:
        n_points = 401
        if kind == "sine":
            n_points = int(min(MAX_POINTS, max(401, SAMPLES_PER_PERIOD * t_end * f_hz + 1)))
    if not isinstance(n_points, (int, np.integer)) or n_points < 3:
        raise ParameterError(f"n_points must be an integer >= 3, got {n_points!r}.")
    return (f_hz if kind == "sine" else None), t_end, int(n_points)


def _default_amplitude_max(system: System, input: str, u0: float) -> float:
    """Ten times the input's bias; with no bias, one unit of its natural scale.

    The natural scale is 1 V for a voltage and 1 mA for a current (a bias
    current of microamps must not be tried at amperes).
    """
    if u0 != 0.0:
        return 10.0 * abs(u0)
    return {"V": 1.0, "A": 1e-3}.get(system.unit(input), 1.0)


def linear_range(
    system: System,
    op=None,
    *,
    input: str,
    output: str,
    tol: float = 0.01,
    kind: str = "step",
    f_hz: float | None = None,
    t_end: float | None = None,
    amplitude_max: float | None = None,
    amplitude_min: float | None = None,
    growth: float = 4.0,
    precision: float = 0.01,
    n_points: int | None = None,
    rtol: float = 1e-8,
    max_steps: int = 50_000,
    solver=None,
    progress: Callable[[str], None] | None = None,
) -> LinearRange:
    """Largest positive and negative input amplitudes within `tol` of the linear model.

    **Arguments:**

    - `system`: an `adlin.System`.
    - `op`: the `OperatingPoint` (None: `adlin.steady_state(system)`).
    - `input`, `output`: names of the driven input and the observed output.
    - `tol`: relative error allowed (0.01 = 1 % of the linear response's swing).
    - `kind`: "step" (a step of amplitude a at t = 0) or "sine"
      (a sin(2 pi f_hz t) from t = 0; the negative polarity starts downward).
    - `f_hz`: sine frequency (Hz); default a decade below the slowest pole.
    - `t_end`: run length (s); default 10 slowest time constants (steps), or
      the longer of that and 3 periods (sines).
    - `amplitude_max`: the largest amplitude tried (input units); default
      10 times the input's bias, or with a zero bias 1 V (voltage inputs),
      1 mA (current inputs), 1 (others).  `amplitude_min`: the smallest; default
      amplitude_max * 1e-6, raised where the solver's own error (about
      rtol times the output's bias) would exceed 1 % of the tolerance.
    - `growth`: ratio of the first ladder of amplitudes (> 1).
    - `precision`: the limits are bracketed to a ratio of 1 + precision.
    - `n_points`: samples of the output grid (default 401 for steps, 100 per
      period for sines, at most 20001).
    - `rtol`, `max_steps`, `solver`: the transients' settings (`adlin.simulate`).
      The error of a transient is about rtol times the output's bias value;
      keep that well below tol times the smallest swing.
    - `progress`: called with a one-line message after every batch.

    **Returns:** a `LinearRange`.

    **Raises:** `ParameterError` (unknown names with the closest valid ones,
    bad settings), `AnalysisError` (an unstable bias, an output the input does
    not move, no default frequency for a static model).
    """
    from .._linear.linearize import linearize
    from .._steady.solve import steady_state
    from .._transient.simulate import simulate
    from .._transient.stimuli import Sine, Step

    if input not in system.inputs:
        raise ParameterError(f"unknown input {input!r} of {system.name!r}: "
                             f"{did_you_mean(input, system.inputs)}.")
    if output not in system.outputs:
        raise ParameterError(f"unknown output {output!r} of {system.name!r}: "
                             f"{did_you_mean(output, system.outputs)}.")
    if kind not in ("step", "sine"):
        raise ParameterError(f"kind must be 'step' or 'sine', got {kind!r}.")
    tol = _positive("tol", tol, below=1.0)
    growth = _positive("growth", growth, above=1.0)
    precision = _positive("precision", precision, below=1.0)
    if op is None:
        op = steady_state(system)
    lin = linearize(system, op)
    notes: list[str] = []
    f_hz, t_end, n_points = _timing(lin, kind, f_hz, t_end, n_points, notes)
    u0 = float(np.asarray(op.u)[system.inputs.index(input)])
    a_max = (_default_amplitude_max(system, input, u0) if amplitude_max is None
             else _positive("amplitude_max", amplitude_max))
    if amplitude_min is not None:
        a_min = _positive("amplitude_min", amplitude_min, below=a_max)

    unit = Step(input, 1.0) if kind == "step" else Sine(input, 1.0, f_hz)
    ts = np.linspace(0.0, t_end, n_points)
    col = system.outputs.index(output)
    y1 = np.asarray(linear_response(lin, unit, ts))[:, col]
    swing1 = max(float(np.max(y1)), 0.0) - min(float(np.min(y1)), 0.0)
    if not swing1 > 0:
        raise AnalysisError(f"input {input!r} does not move output {output!r} in the linear "
                            "model, so there is no swing to measure an error against; pick an "
                            "output that the input drives.")
    y0 = float(np.asarray(op.y)[col])
    if amplitude_min is None:
        # The transient's own error is about rtol |y0|: start where that is at most
        # 1/100 of the tolerated error, so the smallest amplitudes measure the
        # circuit, not the solver.
        floor = 100.0 * rtol * abs(y0) / (tol * swing1)
        a_min = min(max(a_max * 1e-6, floor), a_max / growth)

    def run(a):
        tr = simulate(system, unit.scaled(a), t_end, op=op, t=ts, rtol=rtol,
                      max_steps=max_steps, solver=solver, throw=False)
        return tr.y[:, col], tr.status

    batched = jax.vmap(run)
    k_ladder = int(math.ceil(math.log(a_max / a_min) / math.log(growth))) + 1
    lanes = 2 * k_ladder
    tried: dict[float, float] = {}

    def errors(amps: list[float]) -> None:
        """Run a batch (padded to `lanes` amplitudes) and record the errors."""
        pad = amps + [amps[-1]] * (lanes - len(amps))
        y, status = batched(jnp.asarray(pad))
        y, status = np.asarray(y), np.asarray(status)
        for j, a in enumerate(amps):
            e = np.max(np.abs(y[j] - y0 - a * y1)) / (abs(a) * swing1)
            tried[a] = float(e) if status[j] == 0 and np.isfinite(e) else math.inf
        if progress is not None:
            progress(f"linear range: {len(tried)} transients, amplitudes "
                     f"{min(amps, key=abs):.3g} .. {max(amps, key=abs):.3g}")

    ladder = [a_min * growth**j for j in range(k_ladder - 1)] + [a_max]
    errors(ladder + [-a for a in ladder])

    def bracket(sign: int) -> tuple[float, float]:
        """(last within, first beyond) in magnitude; (a_max, inf) if none beyond."""
        mags = sorted(abs(a) for a in tried if a * sign > 0)
        lo = 0.0
        for m in mags:
            if tried[sign * m] > tol:
                return lo, m
            lo = m
        return lo, math.inf

    for _ in range(MAX_ROUNDS):
        open_ = [s for s in (1, -1) if math.isfinite(bracket(s)[1]) and bracket(s)[0] > 0
                 and bracket(s)[1] / bracket(s)[0] > 1 + precision]
        if not open_:
            break
        per = lanes // len(open_)
        amps = []
        for s in open_:
            lo, hi = bracket(s)
            amps += [s * lo * (hi / lo) ** (i / (per + 1)) for i in range(1, per + 1)]
        errors(amps)

    names = {1: "positive", -1: "negative"}
    result = {}
    for s in (1, -1):
        lo, hi = bracket(s)
        if math.isinf(hi):
            notes.append(f"no {names[s]} limit found up to amplitude {a_max:.4g} "
                         f"(largest error {max(e for a, e in tried.items() if a * s > 0):.3g}).")
        elif lo == 0.0:
            notes.append(f"the {names[s]} error exceeds tol already at the smallest amplitude "
                         f"tried ({a_min:.3g}); lower amplitude_min (or rtol, if this is the "
                         "solver's own error).")
        elif lo > 0 and hi / lo > 1 + precision:
            notes.append(f"the {names[s]} bracket [{lo:.4g}, {hi:.4g}] did not shrink to the "
                         f"precision within {MAX_ROUNDS} rounds.")
        beyond = [abs(a) for a, e in tried.items() if a * s > 0 and abs(a) > hi and e <= tol]
        if beyond:
            notes.append(f"the {names[s]} error falls back below tol at larger amplitudes (e.g. "
                         f"{min(beyond):.4g}); the limit given is the first crossing.")
        failed = [abs(a) for a, e in tried.items() if a * s > 0 and math.isinf(e)]
        if failed:
            notes.append(f"the {names[s]} transient failed from amplitude {min(failed):.4g} on "
                         "(counted as beyond the limit).")
        result[s] = (lo, hi)
    (p_lo, p_hi), (n_lo, n_hi) = result[1], result[-1]
    if math.isinf(p_hi) and math.isinf(n_hi):
        limiting = "none"
    elif p_hi < n_lo or (math.isinf(n_hi) and not math.isinf(p_hi)):
        limiting = "positive"
    elif n_hi < p_lo or (math.isinf(p_hi) and not math.isinf(n_hi)):
        limiting = "negative"
    else:
        limiting = "equal"
    amps = np.array(sorted(tried))
    return LinearRange(
        positive=p_lo, negative=-n_lo, positive_bracket=(p_lo, p_hi),
        negative_bracket=(-n_lo, -n_hi), limiting=limiting, amplitudes=amps,
        errors=np.array([tried[a] for a in amps]), tol=tol, kind=kind, f_hz=f_hz,
        t_end=t_end, precision=precision, input=input, output=output, notes=tuple(notes),
    )

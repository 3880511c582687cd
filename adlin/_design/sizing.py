"""adlin.size: move component values within their bounds until the targets are met."""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np
import scipy.optimize

from .._errors import AnalysisError, ModelError, ParameterError, SteadyStateError, did_you_mean
from .._system import System
from .preferred_numbers import _series, round_to_series
from .quantities import finite_poles
from .sizing_result import SizingResult
from .target_base import AbstractTarget
from .targets import as_targets, evaluate, total_loss, validate

# L-BFGS-B stopping rules.  The losses are zero at an exact design and small
# near it (a pole pair 1e-4 off in relative terms gives about 1e-8), so the
# relative-reduction test must be far tighter than scipy's default (2.2e-9),
# which stops while the design is still ~1e-3 off.
F_TOL = 1e-15
PG_TOL = 1e-12  # projected gradient, in loss per unit of log(value)
RESTARTS = 3  # fresh L-BFGS-B runs from the best point after an abandoned line search
# Curvature (per unit of loss) of the bowl that stands in for the loss where no
# steady state is found (see `_Objective`): large, so the line search backs off.
FAILED_LOSS_FLOOR = 1e6

_TRACES = [0]  # how many times a sizing program was traced (read by the tests)


def trace_count() -> int:
    """How many times any sizing loss program has been traced in this process."""
    return _TRACES[0]


@functools.lru_cache(maxsize=32)
def _program(compiled, free_index: tuple[int, ...], targets: tuple[AbstractTarget, ...]):
    """One jitted loss-and-gradient program per (compiled System, free parameters, targets).

    It takes the steady state `op` already solved at the trial values by the
    System's own compiled Newton solve (the program every steady-state call
    shares, so it is not compiled again inside this one: that saved a third of
    the XLA time on the demo regulator) and adds the implicit-function step
    x = x* - J^-1 f(x*, u, p) with x* and J = df/dx(x*) held constant, whose
    derivative is exactly dx/dp = -J^-1 df/dp.  Arguments are arrays only
    (log-values, the full parameter vector, the operating point), so new
    bounds, starts and warm starts never retrace.
    """
    system = compiled.system
    idx = np.asarray(free_index)

    def run(log_values, p_base, op):
        _TRACES[0] += 1
        u, xs = op.u, jax.lax.stop_gradient(op.x)
        J = jax.lax.stop_gradient(-compiled.local(xs, u, op.p)[2])

        def loss_of(lv):
            p = p_base.at[idx].set(jnp.exp(lv))
            x = xs - jnp.linalg.solve(J, system.f(xs, u, p))
            point = eqx.tree_at(lambda o: (o.x, o.p, o.y), op, (x, p, system.g(x, u, p)))
            model = compiled.linearize(x, u, p)
            loss = total_loss(targets, point, model)
            return loss, (loss, finite_poles(jax.lax.stop_gradient(model)))

        # Forward mode: one tangent per free parameter (a handful), no reverse
        # pass through the eigenvalue solver.
        grad, (loss, poles) = jax.jacfwd(loss_of, has_aux=True)(log_values)
        return loss, grad, poles

    return jax.jit(run)


class _Objective:
    """Host-side objective for scipy: counts evaluations, warm-starts Newton from the
    last converged point, and stands in for the loss where no steady state is found.

    At such a trial point the loss is continued from the last good point g0 (loss
    f0, gradient g) as f0 + g.d + M |d|^2, d = log-values minus g0's, with M large:
    a steep bowl, finite and continuous in value and slope with the true loss at
    g0, so the line search backs off toward the region where the circuit has a
    bias point instead of meeting a cliff (a constant with zero gradient made
    L-BFGS-B stop with an abnormal line search in a test).
    """

    def __init__(self, compiled, program, p_base, free_index, u, x_start):
        self.compiled, self.program = compiled, program
        self.p_base = np.asarray(p_base, dtype=float)
        self.p_base_dev = jnp.asarray(self.p_base)
        self.idx = np.asarray(free_index)
        self.u = u
        self.x_start = x_start  # fallback start when the warm start fails
        self.x_warm = x_start
        self.evaluations = 0
        self.failed = 0
        self.good: tuple[np.ndarray, float, np.ndarray] | None = None  # last good (lv, f, g)
        self.best: tuple[np.ndarray, float] | None = None  # lowest loss seen (lv, f)
        self.last: tuple[np.ndarray, float, np.ndarray] | None = None  # ... with its poles

    def _solve(self, p):
        op = self.compiled.solve(self.u, p, self.x_warm)
        if not bool(op.converged) and self.x_warm is not self.x_start:
            op = self.compiled.solve(self.u, p, self.x_start)
        return op if bool(op.converged) else None

    def __call__(self, lv):
        lv = np.array(lv, dtype=float)
        self.evaluations += 1
        p = self.p_base.copy()
        p[self.idx] = np.exp(lv)
        op = self._solve(jnp.asarray(p))
        if op is not None:
            loss, grad, poles = self.program(jnp.asarray(lv), self.p_base_dev, op)
            loss, grad = float(loss), np.asarray(grad, dtype=float)
            if math.isfinite(loss) and bool(np.all(np.isfinite(grad))):
                self.x_warm = op.x
                self.good = (lv, loss, grad)
                if self.best is None or loss < self.best[1]:
                    self.best = (lv, loss)
                self.last = (lv, loss, np.asarray(poles))
                return loss, grad
        self.failed += 1
        return self.penalty(lv)

    def penalty(self, lv):
        """(loss, gradient) where no steady state was found: see the class docstring."""
        if self.good is None:
            return FAILED_LOSS_FLOOR, np.zeros(len(self.idx))
        lv0, f0, g0 = self.good
        d = np.asarray(lv, dtype=float) - lv0
        m = FAILED_LOSS_FLOOR * (1.0 + f0)
        return f0 + float(g0 @ d) + m * float(d @ d), g0 + 2 * m * d

    def at(self, lv):
        """(loss, poles) at an iterate: the last evaluation is almost always there."""
        lv = np.asarray(lv, dtype=float)
        if self.last is None or not np.array_equal(self.last[0], lv):
            self(lv)
        if self.last is None or not np.array_equal(self.last[0], lv):
            return self.penalty(lv)[0], None
        return self.last[1], self.last[2]


def _free_bounds(system: System, free) -> tuple[tuple[str, ...], np.ndarray, np.ndarray]:
    if not isinstance(free, Mapping) or not free:
        raise ParameterError("size() needs free={name: (low, high), ...}: the parameters to "
                             f"size and their bounds; parameters of {system.name!r}: "
                             f"{did_you_mean('', system.param_names)}.")
    names, low, high = [], [], []
    for name, bounds in free.items():
        if name not in system.param_names:
            raise ParameterError(f"free names {name!r}, which is not a parameter of "
                                 f"{system.name!r}: {did_you_mean(str(name), system.param_names)}.")
        try:
            lo, hi = (float(b) for b in bounds)
        except (TypeError, ValueError):
            raise ParameterError(f"free[{name!r}] must be a pair (low, high) of numbers, got "
                                 f"{bounds!r}.") from None
        if not (math.isfinite(lo) and math.isfinite(hi) and lo > 0 and hi > 0):
            raise ParameterError(f"free[{name!r}] = ({lo!r}, {hi!r}): sizing works on log(value), "
                                 "so both bounds must be positive and finite; for a quantity "
                                 "that changes sign, size a positive parameter that sets it.")
        if not lo < hi:
            raise ParameterError(f"free[{name!r}] = ({lo!r}, {hi!r}): low must be below high "
                                 "(to fix a value, pass it in params=... instead).")
        names.append(name)
        low.append(lo)
        high.append(hi)
    return tuple(names), np.array(low), np.array(high)


def _check_options(starts, max_iterations, round_to, progress) -> None:
    if isinstance(starts, bool) or not isinstance(starts, int) or starts < 1:
        raise ParameterError(f"starts must be a whole number >= 1, got {starts!r}.")
    if isinstance(max_iterations, bool) or not isinstance(max_iterations, int) \
            or max_iterations < 1:
        raise ParameterError(f"max_iterations must be a whole number >= 1, got "
                             f"{max_iterations!r}.")
    if round_to is not None:
        _series(round_to)
    if progress is not None and not callable(progress):
        raise ParameterError(f"progress must be a function progress(start, iteration, loss), "
                             f"got {progress!r}.")


def _operating_point(system, compiled, u, p, x_guess):
    """Steady state at concrete (u, p): Newton from `x_guess`, then the robust chain
    (without the stable-state preference: an unstable loop is a design to fix, not
    a state to leave).  None when nothing converges."""
    from .._steady.solve import steady_state
    from .._steady.strategies import Auto

    op = compiled.solve(u, p, x_guess)
    if bool(op.converged):
        return op
    params = dict(zip(system.param_names, np.asarray(p).tolist(), strict=True))
    inputs = dict(zip(system.inputs, np.asarray(u).tolist(), strict=True))
    op = steady_state(system, inputs, params, strategy=Auto(prefer_stable=False), throw=False)
    return op if bool(op.converged) else None


def _run_start(objective: _Objective, lv0, lo, hi, max_iterations, start, progress):
    """L-BFGS-B from lv0.

    **Returns:** (final log-values, final loss, loss history, value path, pole
    path, the optimizer's message).
    """
    loss0, poles0 = objective.at(lv0)
    losses, path, pole_path = [loss0], [np.exp(lv0)], [poles0]
    if progress is not None:
        progress(start, 0, loss0)

    def callback(xk):
        loss, poles = objective.at(xk)
        losses.append(loss)
        path.append(np.exp(np.asarray(xk, dtype=float)))
        pole_path.append(poles)
        if progress is not None:
            progress(start, len(losses) - 1, loss)

    lv, final, message = lv0, loss0, ""
    for _ in range(1 + RESTARTS):
        left = max_iterations - (len(losses) - 1)
        if left < 1:
            break
        res = scipy.optimize.minimize(
            objective, lv, jac=True, method="L-BFGS-B", bounds=list(zip(lo, hi, strict=True)),
            callback=callback,
            options={"maxiter": left, "maxfun": 20 * left, "ftol": F_TOL, "gtol": PG_TOL},
        )
        message = str(res.message)
        lv = np.clip(np.asarray(res.x, dtype=float), lo, hi)
        final, poles = objective.at(lv)
        if objective.best is not None and objective.best[1] < final:
            # a trial point of an abandoned line search was better than the last iterate
            lv = objective.best[0]
            final, poles = objective.at(lv)
        if not np.array_equal(lv, np.log(path[-1])):
            losses.append(final)
            path.append(np.exp(lv))
            pole_path.append(poles)
        # An abandoned line search (typically next to a region without a steady
        # state) leaves a poor curvature estimate: start afresh from the best point.
        if res.success or final == 0.0:
            break
    return lv, final, losses, path, pole_path, message


def _pad(rows: list, m: int) -> list:
    return list(rows) + [rows[-1]] * (m - len(rows))


def size(
    system: System,
    free: Mapping[str, tuple[float, float]],
    targets: Sequence[AbstractTarget] | AbstractTarget,
    *,
    inputs: Mapping[str, Any] | None = None,
    params: Mapping[str, Any] | None = None,
    starts: int = 3,
    seed: int = 0,
    round_to: str | None = None,
    max_iterations: int = 100,
    progress: Callable[[int, int, float], Any] | None = None,
) -> SizingResult:
    """Size parameters within bounds so that the design targets are met.

    Minimizes the total target loss (`adlin.targets.total_loss`: zero when
    every target is met exactly) over log(value) of the free parameters inside
    log(bounds), with L-BFGS-B (Byrd, Lu, Nocedal & Zhu, "A limited memory
    algorithm for bound constrained optimization", SIAM J. Sci. Comput. 16(5),
    1995) from scipy.optimize, fed exact gradients by JAX.  scipy rather than
    optimistix: L-BFGS-B handles box bounds exactly (projected steps), which
    optimistix 0.1.0 does not offer, and the host loop can stand in for the
    loss where a trial point has no steady state (a steep quadratic bowl
    continued from the last good point, so the line search backs off and no
    NaN reaches the optimizer; after an abandoned line search the optimizer
    restarts from the best point seen, up to `RESTARTS` times).  Log values make the
    search scale-free (a resistor in ohms and a capacitor in farads take
    comparable steps) and keep values positive.

    Each evaluation is the System's compiled Newton solve from the last
    converged point (the program `adlin.steady_state` uses), then one jitted
    program built once per (System, free names, targets): the
    implicit-function step of the steady state, linearization, target losses
    and forward-mode derivatives with respect to the k free log-values only
    (the other parameters are a constant argument).  Values enter as
    arguments, so new bounds or starts never retrace.  Start 0 is the
    nominal design clipped into the bounds; the others are drawn
    log-uniformly inside the bounds from `seed`.  The start with the
    smallest final loss gives the result.  The search loop runs on the host
    (scipy), so `size` itself is not for use inside `jax.jit`; the losses it
    minimizes are (`adlin.targets.total_loss`).

    **Arguments:**

    - `system`: an `adlin.System` (e.g. `circuit.build()`).
    - `free`: {parameter name: (low, high)}, positive bounds in SI units.
    - `targets`: `adlin.targets` objects (`PolePair`, `MinDamping`,
      `Bandwidth`, ...), one or a sequence.
    - `inputs`, `params`: overrides of the defaults (the operating condition
      and the fixed parts); free parameters given here set start 0.
    - `starts`: number of starts (>= 1).
    - `seed`: seed of the random starts (same seed, same result).
    - `round_to`: "E12", "E24" or "E96": also round the best design to that
      preferred-number series (nearest value inside the bounds) and re-check
      the targets there.
    - `max_iterations`: optimizer iterations per start.
    - `progress`: optional `progress(start, iteration, loss)`, called from
      the host loop after each iteration.

    **Returns:** a `SizingResult` (values, loss history, targets met, and the
    rounded design when asked).

    **Raises:** `ParameterError` (unknown free name, bad bounds, no targets, a
    target naming something the model lacks, bad options), `SteadyStateError`
    (no steady state at any start, or at the rounded design), `ModelError`
    (not a System).
    """
    from .._compile import compile

    if not isinstance(system, System):
        raise ModelError(f"size() needs an adlin.System, got {type(system).__name__}; build a "
                         "Circuit with .build().")
    names, low, high = _free_bounds(system, free)
    targets = as_targets(targets)
    if not targets:
        raise ParameterError("size() needs targets=[...]: what the design must meet, e.g. "
                             "adlin.targets.MinDamping(0.5) or PolePair(f_hz, zeta).")
    validate(targets, system)
    _check_options(starts, max_iterations, round_to, progress)
    u = system.input_vector(inputs)
    p_nominal = system.param_vector(params)
    compiled = compile(system)
    idx = tuple(system.param_names.index(n) for n in names)
    program = _program(compiled, idx, targets)
    lo, hi = np.log(low), np.log(high)

    rng = np.random.default_rng(seed)
    nominal = np.clip(np.asarray(p_nominal)[list(idx)], low, high)
    first = [np.log(nominal)]
    first += [lo + rng.uniform(size=len(names)) * (hi - lo) for _ in range(starts - 1)]

    x_guess = _nominal_guess(system, compiled, u, p_nominal)
    runs, evaluations, failed = [], 0, 0
    for s, lv0 in enumerate(first):
        p0 = jnp.asarray(p_nominal).at[np.asarray(idx)].set(jnp.exp(jnp.asarray(lv0)))
        op0 = _operating_point(system, compiled, u, p0, x_guess)
        if op0 is None:
            runs.append(None)
            continue
        obj = _Objective(compiled, program, p_nominal, idx, u, op0.x)
        runs.append(_run_start(obj, lv0, lo, hi, max_iterations, s, progress))
        evaluations += obj.evaluations
        failed += obj.failed
    if all(r is None for r in runs):
        raise SteadyStateError(
            f"size(): no steady state of {system.name!r} at any of the {starts} start points "
            f"(free {', '.join(names)}); check that the design works at the nominal values, or "
            "narrow the bounds.")
    finals = np.array([np.inf if r is None else r[1] for r in runs])
    best = int(np.argmin(finals))
    lv, _, _, path, pole_path, message = runs[best]
    values = np.exp(lv)
    m = max(len(r[2]) for r in runs if r is not None)
    loss_history = np.array([_pad([np.inf] if r is None else r[2], m) for r in runs])
    lengths = np.array([0 if r is None else len(r[2]) for r in runs])
    r_poles = compiled.structure.n_dynamic
    pole_rows = [np.full(r_poles, np.nan + 0j) if q is None else q for q in pole_path]

    p_best = jnp.asarray(p_nominal).at[np.asarray(idx)].set(jnp.asarray(values))
    results = _check_targets(system, compiled, targets, u, p_best, x_guess, "the sized design")
    rounded_values = rounded_results = rounded_met = None
    if round_to is not None:
        rounded_values = np.array([round_to_series(v, round_to, low=a, high=b)
                                   for v, a, b in zip(values, low, high, strict=True)])
        p_round = jnp.asarray(p_nominal).at[np.asarray(idx)].set(jnp.asarray(rounded_values))
        rounded_results = _check_targets(system, compiled, targets, u, p_round, x_guess,
                                         f"the design rounded to {round_to.upper()}")
        rounded_met = jnp.all(jnp.stack([t.met for t in rounded_results]))
        rounded_values = jnp.asarray(rounded_values)

    return SizingResult(
        free_names=names,
        values=jnp.asarray(values),
        low=jnp.asarray(low),
        high=jnp.asarray(high),
        start_values=jnp.asarray(np.exp(np.array(first))),
        final_losses=jnp.asarray(finals),
        best=best,
        loss_history=jnp.asarray(loss_history),
        history_length=jnp.asarray(lengths),
        value_history=jnp.asarray(np.array(_pad(path, m))),
        pole_history=jnp.asarray(np.array(_pad(pole_rows, m), dtype=complex)),
        targets=results,
        met=jnp.all(jnp.stack([t.met for t in results])),
        series=None if round_to is None else round_to.upper(),
        rounded_values=rounded_values,
        rounded_targets=rounded_results,
        rounded_met=rounded_met,
        evaluations=evaluations,
        failed_evaluations=failed,
        message=message,
        start_messages=tuple("no steady state at the start point" if r is None else r[5]
                             for r in runs),
    )


def _nominal_guess(system, compiled, u, p):
    """The steady state at the nominal design, or zeros when there is none."""
    op = _operating_point(system, compiled, u, p, compiled.default_guess())
    return compiled.default_guess() if op is None else op.x


def _check_targets(system, compiled, targets, u, p, x_guess, what: str):
    op = _operating_point(system, compiled, u, p, x_guess)
    if op is None:
        raise SteadyStateError(f"size(): no steady state of {system.name!r} at {what}; "
                               "narrow the bounds or check the model there.")
    model = compiled.linearize(op.x, u, p)
    results = evaluate(targets, op, model)
    for t in results:
        if not bool(jnp.all(jnp.isfinite(t.loss))):
            raise AnalysisError(f"size(): target {t.description!r} gives a non-finite loss at "
                                f"{what}; check the model's small-signal matrices there.")
    return results

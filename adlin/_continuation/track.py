"""adlin.track: follow a branch of steady states along a parameter or an input.

Also `track_family`, the same engine for any one-parameter family
F(x, lam, args) = 0, for other layers (e.g. a source-ramp homotopy that needs
every point where the ramp variable crosses 1).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import jax
import jax.numpy as jnp
import numpy as np

from .._errors import AdlinError, ModelError, ParameterError, did_you_mean
from .._system import System
from .arclength import follow
from .assemble import assemble
from .corrector import engine_for
from .family import FunctionFamily, SystemSweep
from .options import TrackOptions
from .segment import Solver

DEFAULT_MAX_POINTS = 500


def _float(name: str, value: Any) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise AdlinError(f"{name} must be a number, got {value!r}.") from None
    if not math.isfinite(v):
        raise AdlinError(f"{name} must be finite, got {v}.")
    return v


def _steps(start, stop, step, min_step, max_step):
    """Step sizes in parameter units, defaulted from the range and checked."""
    span = abs(stop - start)
    max_step = span / 10 if max_step is None else _float("max_step", max_step)
    step = min(span / 50, max_step) if step is None else _float("step", step)
    min_step = span * 1e-9 if min_step is None else _float("min_step", min_step)
    if not 0 < min_step <= step <= max_step:
        raise AdlinError(f"steps must satisfy 0 < min_step <= step <= max_step; got min_step="
                         f"{min_step:.3g}, step={step:.3g}, max_step={max_step:.3g}.")
    return step, min_step, max_step


def _range(start, stop):
    start, stop = _float("start", start), _float("stop", stop)
    if start == stop:
        raise AdlinError(f"start and stop are both {start:.6g}; give two different values.")
    return start, stop


def _empty(n, n_poles, n_out, param, unknown_names, output_names, reason):
    from .arclength import Walk

    walk = Walk(reason=reason)
    return assemble(walk, None, n, n_poles, n_out, param=param, unknown_names=unknown_names,
                    output_names=output_names, crossings=(), opts=TrackOptions(), span=1.0)


def _run(family, x0, start, stop, args, floors, *, n_poles, n_out, param, unknown_names,
         output_names, step, min_step, max_step, max_points, crossings, options, progress):
    opts = options if options is not None else TrackOptions()
    if not isinstance(opts, TrackOptions):
        raise AdlinError(f"options must be an adlin TrackOptions, got {type(opts).__name__}.")
    max_points = int(max_points)
    if max_points < 2:
        raise AdlinError(f"max_points must be at least 2, got {max_points}.")
    if progress is not None and not callable(progress):
        raise AdlinError("progress must be a function progress(fraction_done, points) or None.")
    crossings = tuple(sorted({_float("crossings", c) for c in crossings}))
    step, min_step, max_step = _steps(start, stop, step, min_step, max_step)
    solver = Solver(engine_for(family), args,
                    (opts.rtol, opts.ftol, opts.update_tol), opts.max_corrector_iterations)
    walk = follow(solver, np.asarray(x0, dtype=float), start, stop, floors, step=step,
                  min_step=min_step, max_step=max_step, max_points=max_points, opts=opts,
                  label=param, progress=progress)
    return assemble(walk, solver, len(floors), n_poles, n_out, param=param,
                    unknown_names=unknown_names, output_names=output_names,
                    crossings=crossings, opts=opts, span=abs(stop - start))


def track(
    system: System,
    param: str,
    start: float,
    stop: float,
    *,
    inputs: Mapping[str, Any] | None = None,
    params: Mapping[str, Any] | None = None,
    guess: Any = None,
    strategy: Any = "auto",
    step: float | None = None,
    min_step: float | None = None,
    max_step: float | None = None,
    max_points: int = DEFAULT_MAX_POINTS,
    crossings: Sequence[float] = (),
    options: TrackOptions | None = None,
    progress: Callable[[float, int], None] | None = None,
):
    """Follow the steady state of `system` as `param` goes from `start` to `stop`.

    Pseudo-arclength continuation (Keller 1977; Allgower & Georg, Numerical
    Continuation Methods, 1990): the branch is followed along its arclength,
    so it passes through folds where the parameter turns back (S-shaped
    curves are followed back over themselves).  Folds are located by solving
    the extended system (Moore & Spence 1980), Hopf points where a complex
    pole pair crosses the imaginary axis; each sample carries its poles and
    stability.  The first point is `adlin.steady_state` at `start`.

    The walk ends when the parameter reaches `stop` (the last sample is
    exactly at `stop`), when the branch turns back past `start`, after
    `max_points` samples, or when it cannot continue (the step fell below
    `min_step`: e.g. the model stops being finite, or the branch ends); the
    branch found so far is returned with `complete=False` and the `reason`.
    Nothing is raised once the first point is found.

    **Arguments:**

    - `system`: an `adlin.System`.
    - `param`: name of a parameter or of an input (a swept resistor, a bias
      voltage).  Its value in `params`/`inputs`, if any, is replaced.
    - `start`, `stop`: the range, in the parameter's units.
    - `inputs`, `params`: other values (dicts by name), as for `steady_state`.
    - `guess`: start guess for the first steady state (as for `steady_state`).
    - `strategy`: the `steady_state` strategy for the first point.
    - `step`: first step length, in parameter units (default 1/50 of the
      range); steps are measured along the branch in a weighted norm and the
      parameter moves by at most one step per step (see
      `adlin._continuation.arclength`).
    - `min_step`: smallest step before giving up (default 1e-9 of the range).
    - `max_step`: largest step (default 1/10 of the range).
    - `max_points`: most samples to keep.
    - `crossings`: parameter values at which to record every crossing of
      the branch exactly (`branch.crossings`).
    - `options`: `TrackOptions` (tolerances, step control).
    - `progress`: optional `progress(fraction_done, points)`, called after
      each accepted sample (for a progress display).

    **Returns:** a `Branch` (an equinox Module): `values`, `x`, `y`, `poles`,
    `stable`, `folds`, `hopf`, `segments`, `complete`, `reason`.

    **Raises:** `ParameterError` for an unknown `param` (or other names),
    `AdlinError` for a bad range, step or option, `ModelError` for a model
    that is not finite at the start guess or fails its structural checks.
    When no steady state is found at `start`, the Branch is empty and its
    `reason` says why.
    """
    from .._compile import compile
    from .._steady.solve import diagnose, steady_state

    if not isinstance(system, System):
        raise ModelError(f"track() needs an adlin.System, got {type(system).__name__}.")
    if not isinstance(param, str):
        raise ParameterError(f"param must be the name of a parameter or input, got {param!r}.")
    if param in system.param_names:
        kind, index = "param", system.param_names.index(param)
        params = {**dict(params or {}), param: 0.0}
    elif param in system.inputs:
        kind, index = "input", system.inputs.index(param)
        inputs = {**dict(inputs or {}), param: 0.0}
    else:
        raise ParameterError(
            f"cannot track {param!r}: it is neither a parameter nor an input of {system.name!r} "
            f"({did_you_mean(param, system.param_names + system.inputs)}).")
    start, stop = _range(start, stop)
    if kind == "param":
        params[param] = start
    else:
        inputs[param] = start
    compiled = compile(system)
    n_poles, n_out = compiled.structure.n_dynamic, len(system.outputs)
    names = dict(param=param, unknown_names=system.unknowns, output_names=system.outputs)
    op = steady_state(system, inputs, params, guess, strategy=strategy, throw=False)
    if not bool(op.converged):
        return _empty(system.n, n_poles, n_out, reason=(
            f"no steady state at the start {param}={start:.6g}: " + diagnose(system, op)),
            **names)
    opts = options if options is not None else TrackOptions()
    floors = np.array([{"V": opts.voltage_scale, "A": opts.current_scale}.get(
        system.unit(k), 1.0) for k in system.unknowns])
    args = (jnp.asarray(op.u), jnp.asarray(op.p))
    return _run(SystemSweep(system, kind, index), np.asarray(op.x), start, stop, args, floors,
                n_poles=n_poles, n_out=n_out, step=step, min_step=min_step,
                max_step=max_step, max_points=max_points, crossings=crossings,
                options=opts, progress=progress, **names)


def track_family(
    residual: Callable[[Any, Any, Any], Any],
    x0: Any,
    start: float,
    stop: float,
    *,
    args: Any = (),
    poles: Callable[[Any, Any, Any], Any] | None = None,
    outputs: Callable[[Any, Any, Any], Any] | None = None,
    x_scale: Any = None,
    step: float | None = None,
    min_step: float | None = None,
    max_step: float | None = None,
    max_points: int = DEFAULT_MAX_POINTS,
    crossings: Sequence[float] = (),
    options: TrackOptions | None = None,
    progress: Callable[[float, int], None] | None = None,
    param: str = "lam",
    unknown_names: Sequence[str] | None = None,
    output_names: Sequence[str] | None = None,
):
    """Follow the branch of residual(x, lam, args) = 0 from (x0, start) towards lam = stop.

    The engine behind `adlin.track`, for any one-parameter family (same walk,
    fold and Hopf location, same Branch).  The jitted programs are cached per
    (residual, poles, outputs) function objects: pass the same functions (not
    fresh lambdas) and put changing values in `args` to avoid recompiling.

    **Arguments:**

    - `residual`: F(x, lam, args) -> (n,), pure JAX.
    - `x0`: (n,) a point with F(x0, start, args) ~ 0 (it is corrected first).
    - `start`, `stop`: the lam range.
    - `args`: a pytree of arrays passed to every function.
    - `poles`: optional P(x, lam, args) -> complex (r,), the poles at a point
      (for stability and Hopf points); e.g. the poles of
      `adlin.compile(system).linearize(x, u, p)`.
    - `outputs`: optional G(x, lam, args) -> (o,), stored as `branch.y`.
    - `x_scale`: (n,) floors of the unknowns' scales in the arclength norm
      (default 1).
    - `crossings`: lam values where every crossing is located exactly
      (`branch.crossings`); e.g. a source ramp followed to stop > 1 with
      `crossings=(1.0,)` collects every steady state it passes at lam = 1.
    - `step`, `min_step`, `max_step`, `max_points`, `options`, `progress`:
      as for `adlin.track`.
    - `param`, `unknown_names`, `output_names`: labels for the Branch.

    **Returns:** a `Branch`.  If x0 cannot be corrected at `start`, the Branch
    is empty and `reason` says so.

    **Raises:** `AdlinError` for bad arguments (shapes, range, steps).
    """
    start, stop = _range(start, stop)
    x0 = np.asarray(jax.device_get(x0), dtype=float)
    if x0.ndim != 1 or x0.size == 0:
        raise AdlinError(f"x0 must be a non-empty 1-D array, got shape {x0.shape}.")
    n = x0.size
    for label, fn in (("residual", residual), ("poles", poles), ("outputs", outputs)):
        if fn is not None and not callable(fn):
            raise AdlinError(f"{label} must be a function (x, lam, args) -> array, got {fn!r}.")
    floors = np.ones(n) if x_scale is None else np.asarray(x_scale, dtype=float)
    if floors.shape != (n,) or not np.all(floors > 0):
        raise AdlinError(f"x_scale must hold {n} positive values, got {floors!r}.")
    lam0 = jnp.asarray(start, dtype=jnp.float64)
    x0j = jnp.asarray(x0)
    shape = jax.eval_shape(residual, x0j, lam0, args).shape
    if shape != (n,):
        raise AdlinError(f"residual returns shape {shape} but x0 has {n} entries.")
    n_poles = jax.eval_shape(poles, x0j, lam0, args).shape[0] if poles is not None else 0
    n_out = jax.eval_shape(outputs, x0j, lam0, args).shape[0] if outputs is not None else 0
    names = tuple(unknown_names) if unknown_names is not None else tuple(
        f"x{i}" for i in range(n))
    if len(names) != n:
        raise AdlinError(f"unknown_names has {len(names)} names for {n} unknowns.")
    outs = tuple(output_names) if output_names is not None else tuple(
        f"y{i}" for i in range(n_out))
    return _run(FunctionFamily(residual, poles, outputs), x0, start, stop, args, floors,
                n_poles=n_poles, n_out=n_out, param=param, unknown_names=names,
                output_names=outs, step=step, min_step=min_step, max_step=max_step,
                max_points=max_points, crossings=crossings, options=options,
                progress=progress)

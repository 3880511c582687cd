"""simulate: the nonlinear transient of a System driven by stimuli, with diffrax.

The model is integrated as an ODE on its dynamic coordinates, with the
algebraic unknowns solved inside the vector field (`adlin._transient.dae`).
The default solver is Kvaerno5, an L-stable ESDIRK method of order 5 with an
embedded error estimate (Kvaerno, BIT 44, 2004), under a PID step-size
controller (Soederlind, ACM Trans. Math. Softw. 29(1), 2003) that stops on
every stimulus edge: circuits are stiff (time constants over many decades),
which explicit methods pay for with tiny steps.

Two settings make the implicit stages affordable on stiff circuits (found on
the demo regulator, poles 1e3 .. 1.8e12 rad/s, which with diffrax's defaults
rejected 11,733 of 20,000 steps and reached 1.5 ms of a 10 ms line step, the
step size stuck near 1e-13 s once the circuit had settled):

- the stages are solved for increments h f in the unknowns' units
  (`term.IncrementTerm`), not for derivatives f against tolerances meant for
  the unknowns;
- the chord iteration stops once its update is far below the tolerance
  (`chord.StageChord`), instead of calling rounding noise divergence.

With both the same run takes 429 steps (11 rejected), 0.5 s after compiling.

One jitted program is built per compiled System and solver settings and
cached; stimulus amplitudes, the operating point, parameters, the output grid
and the end time are its arguments, so a new amplitude or parameter value
reuses the compiled program (the stimulus's timing, which fixes the edges and
their number, is part of the program's static shape).
"""

from __future__ import annotations

import math
import weakref
from collections.abc import Mapping
from typing import Any

import diffrax
import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np
import optimistix as optx
from diffrax._root_finder import use_stepsize_tol

from .._errors import AdlinError, ModelError, ParameterError
from .._steady.operating_point import OperatingPoint
from .._system import System
from .chord import StageChord
from .dae import ReducedField
from .result import FAILED, STEP_BUDGET, SUCCESS, Transient
from .stimuli import as_stimuli, input_deviation, stimulus_edges
from .term import IncrementTerm

# Absolute-tolerance floor per state, in the state's own units (V, A), as a
# multiple of rtol: a state sitting at 0 V is then controlled to rtol * 1 mV.
ATOL_FLOOR = 1e-3

_CACHE: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def default_solver() -> diffrax.AbstractSolver:
    """Kvaerno5 whose stage iteration is `StageChord` with the controller's tolerances."""
    return _DEFAULT_SOLVER


_DEFAULT_SOLVER = diffrax.Kvaerno5(
    root_finder=diffrax.with_stepsize_controller_tols(StageChord)())


def _traced(*xs) -> bool:
    return any(isinstance(leaf, jax.core.Tracer) for leaf in jax.tree_util.tree_leaves(xs))


def reduced_field(compiled) -> ReducedField:
    """The ReducedField of a CompiledSystem, built once."""
    entry = _CACHE.setdefault(compiled, {})
    if "field" not in entry:
        entry["field"] = ReducedField(compiled)
    return entry["field"]


# Tracers of jit and vmap: values without derivatives.  Any other tracer
# (jvp, grad's linearize, a transformation added later) may be reverse-
# differentiated, so it gets the checkpointed loop.
_PLAIN_TRACERS = ("DynamicJaxprTracer", "BatchTracer")


def _differentiated(*xs) -> bool:
    """True when some value may carry a derivative through this call."""
    return any(isinstance(leaf, jax.core.Tracer) and type(leaf).__name__ not in _PLAIN_TRACERS
               for leaf in jax.tree_util.tree_leaves(xs))


def _program(compiled, solver, rtol: float, max_steps: int, step_on_grid: bool,
             reverse: bool, planned: bool = False):
    """The jitted transient program for (System, solver, settings), built once."""
    entry = _CACHE.setdefault(compiled, {})
    key = ("program", solver, rtol, max_steps, step_on_grid, reverse, planned)
    try:
        prog = entry.get(key)
    except TypeError:  # an unhashable solver: key it by identity
        key = ("program", id(solver), rtol, max_steps, step_on_grid, reverse, planned)
        prog = entry.get(key)
    if prog is None:
        prog = jax.jit(_make_run(reduced_field(compiled), solver, rtol, max_steps,
                                 step_on_grid, reverse, planned))
        entry[key] = prog
    return prog


def _make_run(field: ReducedField, solver, rtol: float, max_steps: int, step_on_grid: bool,
              reverse: bool, planned: bool = False):
    system = field.system

    def solver_of(atol):
        # A planned run has no step controller to lend its tolerances to an
        # implicit solver's stage iteration (diffrax refuses that): set them here.
        if not (planned and isinstance(solver, diffrax.AbstractImplicitSolver)):
            return solver
        own = {"rtol": rtol, "atol": atol, "norm": optx.max_norm}
        names = [n for n in own if getattr(solver.root_finder, n, None) is use_stepsize_tol]
        return eqx.tree_at(lambda s: tuple(getattr(s.root_finder, n) for n in names), solver,
                           tuple(own[n] for n in names))

    def vf(t, z, args):
        u0, p, x_ref, stim = args
        u = u0 + input_deviation(system, stim, t)
        return field.vector_field(z, u, p, x_ref)

    # implicit solvers: stages in increment form (see the module notes)
    implicit = isinstance(solver, diffrax.AbstractImplicitSolver)
    term = IncrementTerm(vf) if implicit else diffrax.ODETerm(vf)

    def run(z0, x_ref, u0, p, stim, ts, t_end, jumps, atol, plan):
        us = u0[None, :] + jax.vmap(lambda t: input_deviation(system, stim, t))(ts)
        if field.r:
            if planned:  # equal steps of the given size, no error control (see `simulate`)
                controller = diffrax.ConstantStepSize()
            else:
                controller = diffrax.PIDController(rtol=rtol, atol=atol, jump_ts=jumps,
                                                   step_ts=ts if step_on_grid else None)
            sol = diffrax.diffeqsolve(
                term, solver_of(atol), t0=jnp.asarray(0.0), t1=t_end, dt0=plan, y0=z0,
                args=(u0, p, x_ref, stim), saveat=diffrax.SaveAt(ts=ts),
                stepsize_controller=controller, max_steps=max_steps, throw=False,
                adjoint=diffrax.RecursiveCheckpointAdjoint() if reverse else
                diffrax.ForwardMode())
            zs = sol.ys
            code = jnp.where(sol.result == diffrax.RESULTS.successful, SUCCESS,
                             jnp.where(sol.result == diffrax.RESULTS.max_steps_reached,
                                       STEP_BUDGET, FAILED))
            stats = (sol.stats["num_steps"], sol.stats["num_accepted_steps"],
                     sol.stats["num_rejected_steps"])
        else:  # no storage at all: the response is a sequence of steady states
            zs = jnp.zeros((ts.shape[0], 0))
            code = jnp.asarray(SUCCESS)
            stats = (jnp.asarray(0), jnp.asarray(0), jnp.asarray(0))
        finite = jnp.all(jnp.isfinite(zs), axis=1)
        zs = jnp.where(finite[:, None], zs, 0.0)
        xs, st = jax.vmap(lambda z, u: field.complete(z, u, p, x_ref))(zs, us)
        valid = finite & (st == 0)
        xs = jnp.where(valid[:, None], xs, jnp.nan)
        ys = jax.vmap(lambda x, u: system.g(x, u, p))(xs, us)
        code = jnp.where((code == SUCCESS) & ~jnp.all(valid), FAILED, code)
        # the valid samples are a prefix of the grid; `reached` is its last time
        n_ok = jnp.sum(jnp.cumprod(valid.astype(jnp.int32)))
        reached = jnp.where(n_ok > 0, ts[jnp.maximum(n_ok - 1, 0)], jnp.nan)
        return xs, ys, us, code, reached, stats

    return run


def _grid(t, t_end: float, n_points: int) -> np.ndarray:
    if t is None:
        if not isinstance(n_points, (int, np.integer)) or n_points < 2:
            raise ParameterError(f"n_points must be an integer >= 2, got {n_points!r}.")
        return np.linspace(0.0, t_end, int(n_points))
    try:
        ts = np.asarray(t, dtype=float)
    except (TypeError, ValueError):
        raise ParameterError("t must be a 1-D array of output times in seconds.") from None
    if ts.ndim != 1 or ts.size == 0:
        raise ParameterError(f"t must be a non-empty 1-D array of times, got shape {ts.shape}.")
    if np.any(np.diff(ts) < 0) or ts[0] < 0 or ts[-1] > t_end or not np.all(np.isfinite(ts)):
        raise ParameterError(f"t must be sorted times within [0, t_end = {t_end:g} s]; got "
                             f"{ts[0]:g} .. {ts[-1]:g} s.")
    return ts


def _start(system: System, op, x0, inputs, params):
    """(op, start vector) from the arguments."""
    from .._steady.solve import guess_vector, steady_state

    if op is None:
        traced = _traced(dict(inputs or {}), dict(params or {}))
        # Under a transformation the "auto" chain would compile every strategy
        # into one program; plain Newton is the light choice there.
        op = steady_state(system, inputs=inputs, params=params,
                          strategy="newton" if traced else "auto")
    else:
        if not isinstance(op, OperatingPoint):
            raise ParameterError(f"op must be an adlin.OperatingPoint, got {type(op).__name__}.")
        if op.unknown_names != system.unknowns or op.input_names != system.inputs:
            raise ParameterError(f"op belongs to another model (unknowns {op.unknown_names}); "
                                 f"pass an operating point of {system.name!r}.")
        if inputs is not None or params is not None:
            raise ParameterError("op already fixes the inputs and parameters; pass either op or "
                                 "inputs=/params=, not both.")
        if not _traced(op.converged) and not bool(op.converged):
            raise ParameterError("op did not converge; a transient from it would start from a "
                                 "point that is not a steady state. Solve the bias first.")
    x_start = op.x if x0 is None else guess_vector(system, x0)
    return op, x_start


def _check_index(system: System, compiled, op) -> None:
    """The algebraic block must be regular at the start (index 1), checked on values."""
    if compiled.structure.n_dynamic == system.n or _traced(op.x, op.u, op.p):
        return
    compiled.linearize(op.x, op.u, op.p).reduce()  # raises HighIndexError naming unknowns


def _failure(system: System, tr: Transient, t_end: float, rtol: float,
             dynamic_columns: tuple[int, ...]) -> str:
    code = int(tr.status)
    alg = [system.unknowns[i] for i in range(system.n) if i not in set(dynamic_columns)]
    where = (f"stopped at t = {float(tr.reached):.6g} s of t_end = {t_end:.6g} s"
             if math.isfinite(float(tr.reached)) else "stopped before the first output time")
    hint = (f" the algebraic unknowns ({', '.join(map(repr, alg[:6]))}) may have no solution "
            "there (a device cut fully off, a source beyond what the circuit can follow), or a "
            "capacitance goes through zero" if alg else
            " the model may not be finite there, or a capacitance goes through zero")
    if code == STEP_BUDGET:
        collapsed = int(tr.rejected_steps) > int(tr.steps) // 2
        why = (f" Most steps were rejected, so the step size collapsed near that time:{hint}."
               if collapsed else "")
        return (f"simulate of {system.name!r} used its whole step budget (max_steps="
                f"{tr.max_steps}, {int(tr.rejected_steps)} steps rejected) and {where}; raise "
                f"max_steps, loosen rtol (now {rtol:g}), shorten t_end, or look for an "
                f"oscillation far faster than the stimulus.{why}")
    return (f"simulate of {system.name!r} {where}: the step size collapsed;{hint}. Check the "
            "stimulus amplitude, or pass throw=False to inspect the waveform up to that time.")


def _positive_seconds(name: str, value) -> float:
    """`value` as positive, finite, concrete seconds; else a ParameterError naming `name`."""
    try:
        v = float(value)
    except (TypeError, jax.errors.ConcretizationTypeError):
        raise ParameterError(f"{name} must be a concrete number of seconds (not traced), got "
                             f"{value!r}.") from None
    if not (math.isfinite(v) and v > 0):
        raise ParameterError(f"{name} must be a positive, finite time in seconds, got {value!r}.")
    return v


def simulate(
    system: System,
    stimulus,
    t_end: float,
    *,
    op: OperatingPoint | None = None,
    x0: Any = None,
    inputs: Mapping[str, Any] | None = None,
    params: Mapping[str, Any] | None = None,
    t: Any = None,
    n_points: int = 1001,
    rtol: float = 1e-8,
    atol: Any = None,
    max_steps: int = 100_000,
    solver: diffrax.AbstractSolver | None = None,
    step_on_grid: bool = True,
    dt: float | None = None,
    throw: bool = True,
) -> Transient:
    """Nonlinear transient from an operating point (or a given state) to `t_end`.

    The inputs are u(t) = op.u + the stimulus deviation at t.  The ODE state is
    the model's dynamic part; unknowns without storage (nodes without
    capacitance, source currents) are solved inside the vector field by Newton
    at every evaluation (index-1 systems), differentiably.  Stimulus edges are
    handed to the step-size controller, which stops on them.

    **Arguments:**

    - `system`: an `adlin.System`.
    - `stimulus`: an `adlin.stimuli` stimulus or a tuple of them; None or ()
      for the free response (e.g. from `x0`).
    - `t_end`: end time (s); the run starts at t = 0.
    - `op`: the operating point to start from and linearize around; default
      `adlin.steady_state(system, inputs, params)` (plain Newton when those
      values are traced under jit/grad).
    - `x0`: start from these unknowns instead (array (n,) or dict by name;
      the algebraic unknowns are re-solved for consistency at t = 0).
      `op` (or `inputs`/`params`) still supplies the inputs and parameters.
    - `inputs`, `params`: dicts overriding defaults (only without `op`).
    - `t`: output times (s), sorted within [0, t_end]; default `n_points`
      uniform times from 0 to t_end.
    - `rtol`: relative tolerance of the step controller.
    - `atol`: absolute tolerance per ODE state (scalar or (r,) array, in the
      states' units); default rtol * max(|state at start|, 1e-3).
    - `max_steps`: step budget (accepted plus rejected steps).
    - `solver`: a diffrax solver with an error estimate; default Kvaerno5
      with `StageChord` stage iterations (`default_solver()`).  Implicit
      solvers get their stages in increment form (module notes).
    - `step_on_grid`: end a step on every output time, so each sample carries
      the solver's own accuracy (default).  False lets steps span several
      output times and fills them from the solver's interpolant: fewer steps
      on dense grids, but samples only as accurate as the interpolant
      (about 1e-6 relative with the default tolerance on an RC step).
    - `dt`: None (default) lets the error control choose the steps.  A step
      size instead fixes the step plan: equal steps of `dt` from 0 (the last
      one shortened to end on `t_end`), with no error control; outputs
      between step ends come from the solver's interpolant.  When `dt`
      divides the period of a periodic drive every period gets the same
      steps, so the integration error is itself periodic (`adlin.distortion`
      measures with such a plan).  `rtol` and `atol` then only end the stage
      iterations of an implicit solver.
    - `throw`: raise when the run does not reach `t_end`; with False the
      result carries `status`, `reached` and NaN samples after `reached`.

    **Returns:** a `Transient` (t, x, y, u, status, steps...).

    **Raises:** `ParameterError` (bad stimulus input names, grids, settings),
    `HighIndexError` (algebraic part singular at the start, naming the
    unknowns), `ModelError` (structural problems found when compiling),
    `SteadyStateError` (no operating point), `AdlinError` (the step budget ran
    out or the step size collapsed, saying at what time and what to try).
    Under an outer jit a failed run raises through `equinox.error_if`.
    """
    from .._compile import compile

    if not isinstance(system, System):
        raise ModelError(f"simulate() needs an adlin.System, got {type(system).__name__}.")
    items = as_stimuli(system, stimulus, allow_empty=True)
    t_end_f = _positive_seconds("t_end", t_end)
    if not (isinstance(rtol, (int, float)) and 0 < rtol < 1):
        raise ParameterError(f"rtol must be a number in (0, 1), got {rtol!r}.")
    if not isinstance(max_steps, (int, np.integer)) or max_steps < 1:
        raise ParameterError(f"max_steps must be a positive integer, got {max_steps!r}.")
    solver = _DEFAULT_SOLVER if solver is None else solver
    if not isinstance(solver, diffrax.AbstractSolver):
        raise ParameterError(f"solver must be a diffrax solver, e.g. diffrax.Kvaerno5(), got "
                             f"{solver!r}.")
    ts = _grid(t, t_end_f, n_points)
    if dt is not None:
        dt_f = _positive_seconds("dt", dt)
        if math.ceil(t_end_f / dt_f) > max_steps:
            raise ParameterError(f"{math.ceil(t_end_f / dt_f)} steps of dt={dt_f:g} s do not fit "
                                 f"in max_steps={max_steps}; raise max_steps or use a larger dt.")

    compiled = compile(system)
    field = reduced_field(compiled)
    op, x_start = _start(system, op, x0, inputs, params)
    _check_index(system, compiled, op)

    z0 = field.state(x_start)
    if atol is None:
        atol_v = rtol * jnp.maximum(jnp.abs(jax.lax.stop_gradient(z0)), ATOL_FLOOR)
    else:
        atol_v = jnp.broadcast_to(jnp.asarray(atol, dtype=jnp.float64), (field.r,))
        if not _traced(atol_v) and not bool(jnp.all(atol_v > 0)):
            raise ParameterError(f"atol must be positive, got {atol!r}.")
    edges = stimulus_edges(items, 0.0, t_end_f)
    jumps = jnp.asarray(edges) if edges else None

    args = (z0, op.x, op.u, op.p, items, jnp.asarray(ts), jnp.asarray(t_end_f), jumps, atol_v,
            None if dt is None else jnp.asarray(dt_f))
    # Reverse-mode derivatives need diffrax's checkpointed loop; a plain run (or
    # forward-mode derivatives) takes the lighter loop: about a third less
    # tracing on the demo regulator.  Derivatives always show up as JVP tracers.
    prog = _program(compiled, solver, float(rtol), int(max_steps), bool(step_on_grid),
                    _differentiated(args), dt is not None)
    xs, ys, us, code, reached, stats = prog(*args)
    tr = Transient(
        t=jnp.asarray(ts), x=xs, y=ys, u=us, status=code, reached=reached,
        steps=stats[0], accepted_steps=stats[1], rejected_steps=stats[2],
        max_steps=int(max_steps), unknown_names=system.unknowns, input_names=system.inputs,
        output_names=system.outputs, n_dynamic=field.r,
    )
    if not throw:
        return tr
    if _traced(code):
        ys = eqx.error_if(tr.y, code != SUCCESS,
                          f"adlin: the transient of {system.name!r} did not reach t_end; call "
                          "simulate(..., throw=False) and read .status / .reached.")
        return eqx.tree_at(lambda r: r.y, tr, ys)
    if int(code) != SUCCESS:
        raise AdlinError(_failure(system, tr, t_end_f, rtol,
                                  compiled.structure.dynamic_columns))
    return tr

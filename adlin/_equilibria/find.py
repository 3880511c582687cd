"""adlin.steady_states: several distinct steady states at one parameter set."""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping, Sequence
from typing import Any

import jax
import jax.numpy as jnp
import numpy as np

from .._checks import check_finite
from .._errors import AdlinError, AnalysisError, ModelError, SteadyStateError
from .._steady.operating_point import OperatingPoint
from .._steady.solve import diagnose, guess_vector
from .._system import System
from .classify import UNCLASSIFIED, classify_poles
from .deflation import deflated_solver, unknown_scales
from .options import SteadyStatesOptions
from .result import SteadyStates

__all__ = ["SteadyStates", "SteadyStatesOptions", "steady_states"]


class _Search:
    """The states found so far, with their polishing and de-duplication."""

    def __init__(self, system: System, compiled, u, p, options: SteadyStatesOptions,
                 max_states: int):
        self.system = system
        self.compiled = compiled
        self.u, self.p = u, p
        self.options = options
        self.max_states = max_states
        self.fixed_scales = dict(options.scales)
        self.states: list[OperatingPoint] = []
        self.found_by: list[str] = []
        self.evaluations = 0
        self.failures: list[OperatingPoint] = []

    @property
    def full(self) -> bool:
        return len(self.states) >= self.max_states

    def scale(self, *extra) -> np.ndarray:
        points = [np.asarray(op.x) for op in self.states] + [np.asarray(x) for x in extra]
        return unknown_scales(self.system, points, self.fixed_scales)

    def polish(self, x0, how: str) -> str:
        """Plain Newton on the undeflated model from x0; keep the state if new.

        **Returns:** ``"new"``, ``"duplicate"`` or ``"failed"``.
        """
        op = self.compiled.solve(self.u, self.p, x0)
        self.evaluations += int(op.evaluations)
        if not bool(op.converged):
            self.failures.append(op)
            return "failed"
        x = np.asarray(op.x)
        scale = self.scale(x)
        for known in self.states:
            if np.max(np.abs(x - np.asarray(known.x)) / scale) <= self.options.distinct_rtol:
                return "duplicate"
        self.states.append(op)
        self.found_by.append(how)
        return "new"


def _is_traced(*trees) -> bool:
    return any(isinstance(leaf, jax.core.Tracer) for leaf in jax.tree_util.tree_leaves(trees))


def _capacity(max_states: int) -> int:
    # a few fixed sizes, so that changing max_states rarely compiles again
    return max(8, 1 << (max_states - 1).bit_length())


def _deflate_from(search: _Search, x0, how: str, direction: float = 1.0) -> None:
    """Deflated Newton from one guess, repeated until it fails or finds nothing new."""
    opts = search.options
    newton = dataclasses.replace(opts.newton_options,
                                 max_iterations=opts.deflation_max_iterations)
    solve = deflated_solver(search.system, newton, float(opts.power), float(opts.shift))
    cap = _capacity(search.max_states)
    n = search.system.n
    x0 = np.asarray(x0, dtype=float)
    while not search.full:
        roots = np.zeros((cap, n))
        mask = np.zeros(cap, dtype=bool)
        for k, op in enumerate(search.states):
            roots[k] = np.asarray(op.x)
            mask[k] = True
        scale = search.scale(x0)
        start = _off_known_roots(x0, roots[mask], scale, direction)
        x, status, _, evals = solve(search.u, search.p, start, roots, mask, scale)
        search.evaluations += int(evals)
        if int(status) != 0:
            return
        if search.polish(x, how) != "new":
            return


def _off_known_roots(x0, roots, scale, sign: float, radius: float = 1e-6, step: float = 1e-2):
    """Move a start that sits on a known root off it.

    At a known root the deflated residual is 0 * inf; a little away from it
    the deflated Newton step points away from the root (it is the Newton
    step towards it times 1/(1 - p) = -1 for p = 2), so a small move in a
    fixed, seeded direction (times `sign`) is enough.  A generic direction
    avoids symmetric subspaces (a mirror-symmetric latch started on its
    symmetry line).
    """
    if roots.size == 0:
        return x0
    dist = np.max(np.abs(roots - x0[None, :]) / scale[None, :], axis=1)
    if dist.min() > radius:
        return x0
    direction = np.random.default_rng(0x5EED).standard_normal(x0.shape[0])
    return x0 + sign * step * scale * direction / np.max(np.abs(direction))


def _sorted(search: _Search) -> list[int]:
    if not search.states:
        return []
    xs = np.stack([np.asarray(op.x) for op in search.states])
    scale = search.scale()
    # round in units of the de-duplication tolerance so near-ties sort the same
    keys = np.round(xs / scale[None, :] / search.options.distinct_rtol)
    return list(np.lexsort(keys.T[::-1]))


def steady_states(
    system: System,
    inputs: Mapping[str, Any] | None = None,
    params: Mapping[str, Any] | None = None,
    *,
    guesses: Sequence[Any] = (),
    max_states: int = 8,
    ramp: bool = True,
    deflation: bool = True,
    options: SteadyStatesOptions | None = None,
) -> SteadyStates:
    """Several distinct steady states at one set of inputs and parameters, classified.

    States come from two sources.  The source ramp scales every input by s
    from 0 to `options.ramp_stop` (default 2) and follows the branch of
    steady states by pseudo-arclength continuation; every crossing of s = 1
    is a state (an S-shaped branch gives three).  From each guess, plain
    Newton runs first; then deflation (Farrell, Birkisson & Funke, SIAM J.
    Sci. Comput. 2015) runs Newton on the residual multiplied by a factor
    that is infinite at every state already known, again and again until it
    fails, and once more from just beside each state found.  Every candidate
    is polished with plain Newton on the model itself, kept if it differs
    from the others (scaled distance, `options.distinct_rtol`), and
    classified from the poles of its small-signal model.  Several states are
    never proof that there are no more: deflation and the ramp find states,
    they do not count them.

    Not itself jittable (the number of states depends on the values); each
    returned `OperatingPoint` is differentiable, and
    `adlin.steady_state(system, ..., guess=state)` recomputes one under jit.

    **Arguments:**

    - `system`: an `adlin.System`.
    - `inputs`, `params`: dicts name -> value overriding the defaults.
    - `guesses`: start points for deflation (dicts by unknown name, arrays or
      `OperatingPoint`s); the all-zero guess is always tried after them.
    - `max_states`: stop after this many distinct states (>= 1).
    - `ramp`: follow the source ramp (needs at least one input).
    - `deflation`: run deflated Newton from the guesses; False runs plain
      Newton from each guess once.
    - `options`: `SteadyStatesOptions`.

    **Returns:** a `SteadyStates` (sorted by the unknowns).

    **Raises:** `ParameterError` (unknown input, parameter or guess names),
    `AnalysisError` (bad `max_states`, traced arguments, nothing enabled),
    `ModelError` (non-finite model at a guess), `SteadyStateError` (no
    state found at all; names the worst equations of the best attempt).
    """
    from .._compile import compile

    if not isinstance(system, System):
        raise ModelError(f"steady_states() needs an adlin.System, got {type(system).__name__}.")
    whole = isinstance(max_states, (int, np.integer)) and not isinstance(max_states, bool)
    if not whole or max_states < 1:
        raise AnalysisError(f"max_states must be a whole number >= 1, got {max_states!r}.")
    options = options if options is not None else SteadyStatesOptions()
    if not isinstance(options, SteadyStatesOptions):
        raise AnalysisError(f"options must be a SteadyStatesOptions, got {type(options).__name__}.")
    if not (ramp or deflation or guesses):
        raise AnalysisError("steady_states() has nothing to do: ramp=False and deflation=False "
                            "with no guesses; enable one of them or pass guesses=[...].")
    for name, _ in options.scales:
        if name not in system.unknowns:
            from .._errors import ParameterError, did_you_mean

            raise ParameterError(f"SteadyStatesOptions scale names {name!r}, which is not an "
                                 f"unknown: {did_you_mean(name, system.unknowns)}.")
    if isinstance(guesses, (Mapping, OperatingPoint)) or getattr(guesses, "ndim", 0) == 1:
        guesses = (guesses,)  # one guess given bare
    u = system.input_vector(inputs)
    p = system.param_vector(params)
    starts = [guess_vector(system, g) for g in guesses]
    if _is_traced(u, p, starts):
        raise AnalysisError("steady_states() cannot run under jit, vmap or grad: the number of "
                            "states depends on the values; differentiate one state with "
                            "adlin.steady_state(system, ..., guess=state) instead.")
    compiled = compile(system, options.newton)
    zero = np.asarray(compiled.default_guess())
    starts = [np.asarray(x) for x in starts]
    if not any(np.array_equal(x, zero) for x in starts):
        starts.append(zero)
    for k, x0 in enumerate(starts):
        f, E, A, *_ = compiled.local(x0, u, p)
        check_finite(system, np.asarray(f), -np.asarray(A), np.asarray(E),
                     where=f"at guess {k}")

    search = _Search(system, compiled, u, p, options, int(max_states))
    ramp_note = "not run"
    if ramp and system.inputs:
        from .ramp import ramp_candidates

        try:
            walked = ramp_candidates(compiled, u, p, zero, options)
        except AdlinError as err:
            # the ramp is one way in among several: a model that cannot be
            # followed (not finite with the sources low, say) leaves deflation
            walked = None
            ramp_note = f"the source ramp failed: {err}"
        if walked is not None:
            search.evaluations += walked.evaluations
            ramp_note = walked.reason
            for x in walked.candidates:
                if search.full:
                    break
                search.polish(x, "source ramp")
    elif ramp:
        ramp_note = "the model has no inputs to ramp"
    for k, x0 in enumerate(starts):
        if search.full:
            break
        # plain (damped) Newton first: deflated Newton takes full steps, which
        # can cycle where the line search would not (x' = 0.5 + x - x^3 from 0)
        search.polish(x0, f"newton from guess {k}")
        if deflation:
            _deflate_from(search, x0, f"deflation from guess {k}")
    if deflation:
        # Every state found is a start too: just off a known root the deflated
        # step points away from it, along the move's direction, so two moves
        # in opposite directions explore both sides (e.g. from a latch's
        # metastable point towards each of its stable states).
        seen = 0
        while seen < len(search.states) and not search.full:
            x0 = np.asarray(search.states[seen].x)
            for sign in (1.0, -1.0):
                _deflate_from(search, x0, f"deflation from state {seen}", sign)
            seen += 1

    if not search.states:
        worst = min(search.failures, default=None,
                    key=lambda op: float(np.nan_to_num(op.residual_norm, nan=np.inf)))
        if worst is None:
            worst = compiled.solve(u, p, starts[0])
        raise SteadyStateError("no steady state found by the source ramp or deflation; "
                               + diagnose(system, worst))

    order = _sorted(search)
    states = tuple(search.states[i] for i in order)
    poles, labels, notes = [], [], []
    for i, op in enumerate(states):
        try:
            pl = compiled.linearize(op.x, u, p).poles()
        except AdlinError as err:
            # one state where the small-signal model does not exist (index > 1
            # there) must not hide the others: say so and keep going
            poles.append(jnp.zeros((0,), jnp.complex128))
            labels.append(UNCLASSIFIED)
            notes.append(f"state {i} not classified: {err}")
            continue
        poles.append(pl)
        labels.append(classify_poles(np.asarray(pl), options.marginal_tol))
    return SteadyStates(
        states=states,
        poles=tuple(poles),
        labels=tuple(labels),
        found_by=tuple(search.found_by[i] for i in order),
        evaluations=search.evaluations,
        marginal_tol=options.marginal_tol,
        ramp_note=ramp_note,
        notes=tuple(notes),
    )

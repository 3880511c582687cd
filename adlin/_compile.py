"""compile(system): checked model with jitted steady-state, linearization and poles.

The jitted functions take arrays (inputs, parameters, guess) and are built
once per model, so new values never cause a retrace.  `compile` is cached
per System.
"""

from __future__ import annotations

import functools

import equinox as eqx
import jax
import jax.numpy as jnp
import numpy as np

from ._checks import analyze
from ._derivatives import derivatives_of
from ._linear.model import LinearModel
from ._steady.implicit import newton_update
from ._steady.newton import JunctionTable, NewtonOptions, newton_solve
from ._steady.operating_point import OperatingPoint
from ._steady.strategies import AbstractStrategy, Candidate, Newton, Problem
from ._steady.strategies.reasons import N_STRATEGIES, NEWTON, NOT_TRIED, POLISH_FAILED
from ._structure import Structure
from ._system import System


def _junction_table(system: System) -> JunctionTable:
    idx = {name: i for i, name in enumerate(system.unknowns)}
    js = system.junctions
    return JunctionTable(
        anode=np.array([idx[j.anode] if j.anode else -1 for j in js], dtype=int),
        cathode=np.array([idx[j.cathode] if j.cathode else -1 for j in js], dtype=int),
        vt=np.array([j.thermal_voltage for j in js], dtype=float),
        vcrit=np.array([j.critical_voltage for j in js], dtype=float),
    )


def _node_mask(system: System) -> np.ndarray:
    """Unknowns that are node voltages (unit "V"); all unknowns if there are none."""
    mask = np.array([system.unit(k) == "V" for k in system.unknowns], dtype=bool)
    return mask if mask.any() else np.ones(system.n, dtype=bool)


class CompiledSystem:
    """A checked System with jitted pure functions of (inputs, params).

    **Arguments:**

    - `system`: the model.
    - `options`: `NewtonOptions` for the steady-state solver.

    **Raises:** `ModelError` (and subclasses) for the structural problems
    listed in `adlin._checks`.
    """

    def __init__(self, system: System, options: NewtonOptions | None = None):
        self.system = system
        self.options = options or NewtonOptions()
        self.derivatives = derivatives_of(system)
        # One jitted program gives the whole local model (f, E, A, B, C, D, y) at a
        # point: the structural checks, the finite check at a guess and
        # linearization all reuse it, so it is compiled once.
        self.local = jax.jit(self._local)
        self.structure: Structure = analyze(system, self.local)
        self.junctions = _junction_table(system)
        self._left = np.asarray(self.structure.left)
        self._right = np.asarray(self.structure.right)
        self.node_mask = _node_mask(system)
        self.solve = jax.jit(self._solve)
        self._strategy_solves: dict[AbstractStrategy, object] = {}
        self.poles = jax.jit(self._poles)

    # -- pure functions (jitted in __init__) -----------------------------
    def _solve(self, u, p, x0, linear_solve=jnp.linalg.solve, head_steps: int = 0
               ) -> OperatingPoint:
        """Steady state from guess x0: plain Newton, then one implicit-function step.

        `linear_solve(J, rhs)` solves for Newton's steps, and the first
        `head_steps` iterations run as a scan (see `newton_solve`).
        """
        s = self.system
        res = newton_solve(lambda x: s.f(x, u, p), jax.lax.stop_gradient(x0), self.junctions,
                           self.options, value_and_jacobian=self._jacobian(u, p),
                           linear_solve=linear_solve, head_steps=head_steps)
        slot = jnp.arange(N_STRATEGIES) == NEWTON
        record = Candidate(
            x=res.x, reason=res.status, evaluations=res.evaluations, steps=res.iterations,
            progress=jnp.asarray(1.0), code=jnp.asarray(NEWTON), polished=res.status == 0,
            jacobian=res.jacobian,
            attempts=jnp.where(slot, res.status, NOT_TRIED),
            attempt_evaluations=jnp.where(slot, res.evaluations, 0),
            attempt_steps=jnp.where(slot, res.iterations, 0),
            attempt_progress=jnp.where(slot, 1.0, 0.0),
        )
        return self._finish(u, p, res.x, res.jacobian, res.status, res.iterations,
                            res.evaluations, record, step=res.step, residual=res.residual)

    def problem(self, u, p) -> Problem:
        """The `Problem` strategies search, at stop-gradient (u, p): derivatives come
        from the implicit-function step in `_finish`, never from the search path."""
        s = self.system
        return Problem(
            f=s.f, q=s.q, u=jax.lax.stop_gradient(u), p=jax.lax.stop_gradient(p),
            node_mask=self.node_mask, input_names=s.inputs, param_names=s.param_names,
            junctions=self.junctions, options=self.options,
        )

    def _solve_strategy(self, strategy: AbstractStrategy, u, p, x0) -> OperatingPoint:
        """Search with `strategy`, polish its end point by Newton, differentiate by IFT."""
        s = self.system
        cand = strategy.search(self.problem(u, p), jax.lax.stop_gradient(x0))
        # Newton from the search's end point with the user's tolerances; skipped
        # (no iteration) where the search failed or already ended on a Newton test.
        needs = (cand.reason == 0) & ~cand.polished
        pol = newton_solve(lambda x: s.f(x, u, p), cand.x, self.junctions, self.options,
                           active=needs, value_and_jacobian=self._jacobian(u, p))
        polish_failed = needs & (pol.status != 0)
        status = jnp.where(needs, jnp.where(polish_failed, POLISH_FAILED, 0), cand.reason)
        xs = jnp.where(needs, pol.x, cand.x)
        J = jnp.where(needs, pol.jacobian, cand.jacobian)
        slot = (jnp.arange(N_STRATEGIES) == cand.code) & polish_failed
        cand = eqx.tree_at(lambda c: c.attempts, cand,
                           jnp.where(slot, POLISH_FAILED, cand.attempts))
        iterations = cand.steps + jnp.where(needs, pol.iterations, 0)
        evaluations = cand.evaluations + pol.evaluations
        return self._finish(u, p, xs, J, status, iterations, evaluations, cand)

    def _jacobian(self, u, p):
        """x -> (f, df/dx) for Newton: the cheapest exact Jacobian (`adlin._derivatives`)."""
        return lambda x: self.derivatives.current_x(x, u, p)

    def _finish(self, u, p, xs, J, status, iterations, evaluations, record: Candidate,
                step=None, residual=None):
        """The OperatingPoint at a solved xs, with x differentiable in (u, p).

        x_out = x* - J^-1 f(x*, u, p) with x* and J = df/dx(x*) held constant is
        the final Newton update (x* passed the convergence test), and its
        derivative is exactly dx/dp = -J^-1 df/dp (implicit function theorem),
        whatever path found x*.  When the solver hands over that update
        (`step`, with f at x* as `residual`), values need no second solve
        (`newton_update`).
        """
        s = self.system
        converged = status == 0
        xs = jax.lax.stop_gradient(xs)
        J = jax.lax.stop_gradient(J)
        f_star = s.f(xs, u, p)
        if step is None:
            step = -jnp.linalg.solve(J, f_star)
            residual = f_star
        step = jax.lax.stop_gradient(step)
        x = jnp.where(converged & jnp.all(jnp.isfinite(step)),
                      newton_update(xs, step, J, f_star), xs)
        return OperatingPoint(
            x=x,
            u=u,
            p=p,
            y=s.g(x, u, p),
            converged=converged,
            status=status,
            iterations=iterations,
            evaluations=evaluations,
            residual_norm=jnp.max(jnp.abs(jax.lax.stop_gradient(residual))),
            strategy=record.code,
            attempts=record.attempts,
            attempt_evaluations=record.attempt_evaluations,
            attempt_steps=record.attempt_steps,
            attempt_progress=record.attempt_progress,
            unknown_names=s.unknowns,
            input_names=s.inputs,
            output_names=s.outputs,
            param_names=s.param_names,
        )

    def solve_with(self, strategy: AbstractStrategy):
        """The jitted solve (u, p, x0) -> OperatingPoint for one strategy, built once.

        `Newton()` gives `solve` itself (the same compiled program).  Other
        strategies search, then polish by Newton, then take the implicit-function
        step, so the derivatives are those of `solve`.
        """
        if isinstance(strategy, Newton):
            return self.solve
        fn = self._strategy_solves.get(strategy)
        if fn is None:
            fn = jax.jit(functools.partial(self._solve_strategy, strategy))
            self._strategy_solves[strategy] = fn
        return fn

    def _local(self, x, u, p):
        # Each model function is traced once: derivatives with respect to the
        # stacked (x, u), with the value itself carried as the auxiliary output.
        s = self.system
        n = s.n

        def split(z):
            y = s.g(z[:n], z[n:], p)
            return y, y

        Jg, y = jax.jacfwd(split, has_aux=True)(jnp.concatenate([x, u]))
        f, dfdx, dfdu = self.derivatives.current(x, u, p)
        _, E = self.derivatives.charge(x, p)
        return f, E, -dfdx, -dfdu, Jg[:, :n], Jg[:, n:], y

    def matrices(self, x, u, p):
        """(E, A, B, C, D) at a point (jitted through `local`)."""
        return self.local(x, u, p)[1:6]

    def linearize(self, x, u, p) -> LinearModel:
        """The LinearModel at (x, u, p); usable under jit, vmap and grad."""
        s = self.system
        _, E, A, B, C, D, y = self.local(x, u, p)
        dyn = tuple(s.unknowns[i] for i in self.structure.dynamic_columns)
        return LinearModel(
            E=E, A=A, B=B, C=C, D=D,
            x0=x, u0=u, y0=y,
            left=jax.device_put(self._left), right=jax.device_put(self._right),
            n_dynamic=self.structure.n_dynamic,
            state_names=s.unknowns, input_names=s.inputs, output_names=s.outputs,
            dynamic_names=dyn,
            unit_items=tuple((k, s.unit(k)) for k in s.unknowns + s.inputs + s.outputs),
        )

    def _poles(self, u, p, x0):
        op = self._solve(u, p, x0)
        return self.linearize(op.x, u, p).poles(), op.converged

    # -- conveniences -----------------------------------------------------
    def default_guess(self):
        return jnp.zeros((self.system.n,), dtype=jnp.float64)

    def __repr__(self) -> str:
        return (f"CompiledSystem({self.system.name!r}, {self.structure.n_dynamic} dynamic of "
                f"{self.system.n} unknowns)")


@functools.lru_cache(maxsize=64)
def _compile_cached(system: System, options: NewtonOptions) -> CompiledSystem:
    return CompiledSystem(system, options)


def compile(system: System, options: NewtonOptions | None = None) -> CompiledSystem:  # noqa: A001
    """Check a System and build its jitted functions (cached per System and options).

    **Arguments:**

    - `system`: an `adlin.System`.
    - `options`: `NewtonOptions` for the steady-state solver (default settings if None).

    **Returns:** a `CompiledSystem` with `solve(u, p, x0)`, `local(x, u, p)`
    (f, E, A, B, C, D, y), `linearize(x, u, p)`, `matrices(x, u, p)` and
    `poles(u, p, x0)`, each compiled once and reused for new values.

    **Raises:** `ModelError` and subclasses when a structural check fails.
    """
    from ._errors import ModelError

    if not isinstance(system, System):
        raise ModelError(f"compile() needs an adlin.System, got {type(system).__name__}.")
    return _compile_cached(system, options or NewtonOptions())

"""adlin.monte_carlo: tolerance study by random sampling of parameters and inputs."""

from __future__ import annotations

import functools
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import jax
import jax.numpy as jnp
import numpy as np

from .._errors import ModelError, ParameterError
from .._system import System
from .batch import refuse_traced, resolve_names, run_batch
from .batch_result import BatchResult, MonteCarloResult
from .quantities import AbstractQuantity
from .tolerances import AbstractTolerance, as_tolerance


def draw_samples(system: System, tolerances: Mapping[str, AbstractTolerance],
                 nominal: Mapping[str, float], n: int, seed: int) -> np.ndarray:
    """The (n, k) sample values, columns in the order of `tolerances`.

    Each name draws from its own key, `fold_in(PRNGKey(seed), i)` with i its
    position among the system's parameters then inputs, and all n values at
    once: a name's samples depend only on the seed, its position in the model
    and n, not on the chunk size, the devices, the other tolerances or the
    order they are given in.  On several hosts every process draws the same
    samples and computes its share of them.
    """
    order = system.param_names + system.inputs
    positions = tuple(order.index(name) for name in tolerances)
    dev = np.asarray(_deviations(seed, positions, tuple(tolerances.values()), n), np.float64)
    cols = [nominal[name] + tol.scale(nominal[name]) * dev[i]
            for i, (name, tol) in enumerate(tolerances.items())]
    return np.stack(cols, axis=1)


@functools.partial(jax.jit, static_argnums=(1, 2, 3))
def _deviations(seed, positions: tuple[int, ...], tolerances: tuple, n: int):
    """The standardized deviations of `draw_samples`, one row per name, in one
    compiled call (drawn op by op they took 4.6 ms for six names, measured;
    the values are the same bits, `tests/test_monte_carlo.py`)."""
    root = jax.random.PRNGKey(seed)
    return jnp.stack([tol.draw(jax.random.fold_in(root, k), n)
                      for k, tol in zip(positions, tolerances, strict=True)])


def monte_carlo(
    system,
    tolerances: Mapping[str, AbstractTolerance | str],
    n: int = 1000,
    seed: int = 0,
    *,
    inputs: Mapping[str, Any] | None = None,
    params: Mapping[str, Any] | None = None,
    of: Sequence[AbstractQuantity | str] = (),
    targets=(),
    chunk: int | None = None,
    devices=None,
    fast_solves: bool | None = None,
    progress: Callable[[int, int], Any] | None = None,
) -> MonteCarloResult:
    """Spread of the bias point, poles and chosen quantities under part tolerances.

    Parameters and inputs are drawn with `jax.random` from `seed` (uniform or
    normal, relative or absolute: `adlin.tolerances`); every sample gets its
    steady state by the compiled Newton solve from the nominal operating point,
    its small-signal poles, the quantities in `of` and the met flags of
    `targets`, all in one `jax.jit(jax.vmap(...))` program compiled once and
    run on fixed-size chunks spread over every device (`adlin._design.batch`).
    The same seed gives the same samples and results whatever the chunk size
    or number of devices.

    **Arguments:**

    - `system`: an `adlin.System`.
    - `tolerances`: name -> spec for parameters and/or inputs: `Uniform(rel=...)`,
      `Uniform(abs=...)`, `Normal(rel=...)`, `Normal(abs=...)` or text such as
      "1%", "0.5%:normal", "2m", "2m:normal" (`adlin.tolerances.parse`).
    - `n`: number of samples (>= 1).
    - `seed`: integer seed of the random draws.
    - `inputs`, `params`: nominal overrides (the centre of the tolerances).
    - `of`, `targets`, `chunk`, `devices`, `fast_solves`, `progress`: as `adlin.sweep`.

    **Returns:** a `MonteCarloResult` (per-sample arrays, `failures()`,
    `yield_fraction()` against `targets`, `summary()` of the distributions).

    **Raises:** `ParameterError` (unknown names, n < 1, a bad tolerance, a
    relative tolerance on a zero nominal value), `AnalysisError` (quantities),
    `SteadyStateError` (no nominal operating point).
    """
    if not isinstance(system, System):
        raise ModelError(f"monte_carlo() needs an adlin.System, got {type(system).__name__}.")
    if not isinstance(tolerances, Mapping) or not tolerances:
        raise ParameterError("monte_carlo() needs tolerances={name: spec, ...}, e.g. "
                             "{'R1': '1%', 'C1': adlin.tolerances.Normal(rel=0.05)}.")
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise ParameterError(f"monte_carlo() needs n >= 1 samples (a whole number), got {n!r}.")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)):
        raise ParameterError(f"seed must be an integer, got {seed!r}.")
    refuse_traced("monte_carlo", inputs, params)
    names = tuple(tolerances)
    resolve_names(system, names, "tolerances")
    specs = {k: as_tolerance(k, v) for k, v in tolerances.items()}
    pvec = np.asarray(system.param_vector(params))
    uvec = np.asarray(system.input_vector(inputs))
    nominal = {k: float(pvec[system.param_names.index(k)]) if k in system.param_names
               else float(uvec[system.inputs.index(k)]) for k in names}
    for k, tol in specs.items():
        tol.check_nominal(k, nominal[k])
    values = draw_samples(system, specs, nominal, int(n), int(seed))
    out = run_batch(system, names, values, inputs=inputs, params=params, of=of,
                    targets=targets, chunk=chunk, devices=devices, progress=progress,
                    fast_solves=fast_solves,
                    what="monte_carlo")
    return MonteCarloResult(
        **BatchResult.fields_from(out, names, values, system.unknowns),
        seed=int(seed), nominal=jnp.asarray([nominal[k] for k in names]),
        tolerances=tuple((k, specs[k].describe()) for k in names),
    )

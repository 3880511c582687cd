"""adlin.sweep: steady state, poles, quantities and targets over a grid of values."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np

from .._errors import ParameterError
from .batch import refuse_traced, run_batch
from .batch_result import BatchResult, SweepResult
from .quantities import AbstractQuantity


def _grid_values(grid: Mapping[str, Any], product: bool) -> tuple[tuple[str, ...], np.ndarray,
                                                                   tuple[int, ...]]:
    if not isinstance(grid, Mapping) or not grid:
        raise ParameterError("sweep() needs grid={name: values, ...} naming at least one "
                             "parameter or input.")
    names = tuple(grid)
    refuse_traced("sweep", dict(grid))
    cols = []
    for name in names:
        try:
            v = np.asarray(grid[name], dtype=np.float64).reshape(-1)
        except (TypeError, ValueError):
            raise ParameterError(f"grid[{name!r}] must be numbers, got {grid[name]!r}.") from None
        if v.size == 0:
            raise ParameterError(f"grid[{name!r}] is empty; give at least one value.")
        if not np.all(np.isfinite(v)):
            raise ParameterError(f"grid[{name!r}] holds a value that is not finite.")
        cols.append(v)
    if product:
        shape = tuple(c.size for c in cols)
        mesh = np.meshgrid(*cols, indexing="ij")
        return names, np.stack([m.reshape(-1) for m in mesh], axis=1), shape
    lengths = {c.size for c in cols}
    if len(lengths) != 1:
        sizes = ", ".join(f"{k}: {c.size}" for k, c in zip(names, cols, strict=True))
        raise ParameterError(f"sweep(product=False) zips the values, so every name needs the same "
                             f"number of them ({sizes}); pass product=True for every combination.")
    return names, np.stack(cols, axis=1), (cols[0].size,)


def sweep(
    system,
    grid: Mapping[str, Any],
    *,
    product: bool = True,
    inputs: Mapping[str, Any] | None = None,
    params: Mapping[str, Any] | None = None,
    of: Sequence[AbstractQuantity | str] = (),
    targets=(),
    chunk: int | None = None,
    devices=None,
    fast_solves: bool | None = None,
    progress: Callable[[int, int], Any] | None = None,
) -> SweepResult:
    """Steady state, small-signal poles, quantities and targets at every grid point.

    Every point starts the compiled Newton solve from the nominal operating
    point (the defaults with `inputs`/`params` applied) and runs in one
    `jax.jit(jax.vmap(...))` program, compiled once, over chunks of a fixed
    size spread over `devices` (see `adlin._design.batch`).

    **Arguments:**

    - `system`: an `adlin.System`.
    - `grid`: name -> 1-D values, names of parameters and/or inputs.
    - `product`: True: every combination (shape = the value counts, C order);
      False: the values zipped (all of one length).
    - `inputs`, `params`: nominal overrides for everything not in the grid.
    - `of`: quantities to record (`adlin.quantities`, or names for `Bias`).
    - `targets`: `adlin.targets` objects; `target_met` per point.
    - `chunk`: samples per compiled batch (default: up to 2048 per device);
      rounded to a multiple of the device count, and kept small enough with
      several CPU devices that batched LAPACK cannot deadlock (DEVELOPERS.md).
    - `devices`: the JAX devices to use (default all of `jax.devices()`).
    - `fast_solves`: True: solve with sparse LU plans made at the nominal point
      (`adlin._design.fast_path`; several times faster per sample, a few seconds
      more compilation), re-running with the general solvers any sample they do
      not finish; False: general solvers only; None (default): True from
      4096 samples on.
    - `progress`: optional `progress(done, total)` called after each chunk.

    **Returns:** a `SweepResult` (`shape`, `grid(name)`, `reshape`, `failures()`,
    `yield_fraction()`, `summary()`).

    **Raises:** `ParameterError` (unknown names, ragged zipped values, empty or
    non-finite values, bad chunk), `AnalysisError` (quantities), `SteadyStateError`
    (no nominal operating point).
    """
    names, values, shape = _grid_values(grid, product)
    out = run_batch(system, names, values, inputs=inputs, params=params, of=of,
                    targets=targets, chunk=chunk, devices=devices, progress=progress,
                    fast_solves=fast_solves,
                    what="sweep")
    return SweepResult(**BatchResult.fields_from(out, names, values, system.unknowns),
                       shape=shape, product=bool(product))

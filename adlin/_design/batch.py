"""The batched engine under `adlin.sweep` and `adlin.monte_carlo`.

For an (n, k) array of values of k parameters and/or inputs, every sample
gets its steady state (the compiled Newton solve from the nominal operating
point), its small-signal model, its poles, the chosen quantities and the
met flags of the chosen targets.  One program `jax.jit(jax.vmap(...))` per
(compiled System, varied names, quantities, targets) is built once and run
on chunks of one fixed size (the last chunk padded with the nominal values
and the padding dropped), so a run compiles once whatever n is.  With several
devices each chunk is split over a one-axis device mesh ("batch", automatic
axis type; see ../shared/JAX_NOTES.md): the same call runs on one CPU, on
several devices and on several hosts.

A sample that fails keeps its row, with its status code and NaN in its
unknowns, poles and quantities; the result's `failures()` lists it and summaries skip it.
"""

from __future__ import annotations

import dataclasses
import functools
import math
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import jax
import jax.numpy as jnp
import numpy as np
from jax.sharding import AxisType, NamedSharding, PartitionSpec

from .._errors import AnalysisError, ModelError, ParameterError, did_you_mean
from .._steady.strategies.reasons import REASON_MESSAGES
from .._system import System
from .fast_path import FastPlans
from .nominal_point import nominal_point
from .quantities import AbstractQuantity, resolve_quantities
from .sensitivities import COALESCE_RTOL, _pole_refs
from .targets import as_targets

# Status of a sample whose steady state converged but whose small-signal
# results (unknowns, poles or quantities) are not all finite, e.g. a
# parameter value that makes the algebraic part of the model singular.
NON_FINITE_RESULT = 100

# Largest per-sample LAPACK cost, batch * n^3, that one device's batched call
# may have when several CPU devices run at once (see `device_chunk_limit`).
# 2e5 (59 samples of the 15-unknown demo per device) still hung on
# 2026-12-02 with two devices, both stuck in the batched eigenvalue kernel;
# 32 and 16 per device ran.
_PARALLEL_LAPACK_BUDGET = 100_000
# Runs of at least this many samples use the planned sparse solves by default
# (`adlin._design.fast_path`): on the demo regulator they save 10-15 us of
# ~50 us per sample and cost 5-10 s more compilation, which pays off only on
# large or repeated runs (the CLI keeps compiled programs on disk).
FAST_SOLVES_FROM = 4096
# Default samples per device and chunk on one device: big enough that
# dispatch costs nothing next to the work, small enough for memory.
_DEFAULT_PER_DEVICE = 2048


def status_message(code: int) -> str:
    """The reason for a sample's status code, as a clause."""
    if code == NON_FINITE_RESULT:
        return ("the steady state converged but its small-signal results (unknowns, poles or "
                "quantities) are not finite; the model may be singular at these values")
    return REASON_MESSAGES.get(int(code), f"status {int(code)}")


def refuse_traced(what: str, *values) -> None:
    """Raise `AnalysisError` when called under jit, vmap or grad (a host-side driver)."""
    from .._steady.solve import _is_traced

    if _is_traced(*values):
        raise AnalysisError(f"{what}() runs batches from the host and takes concrete values; "
                            "inside jit, vmap or grad use jax.vmap over adlin.steady_state(..., "
                            "strategy='newton') and adlin.linearize instead.")


def resolve_names(system: System, names: Sequence[str], what: str) -> tuple[tuple[int, ...],
                                                                             tuple[int, ...]]:
    """Index of each name among the parameters (-1: an input) and the inputs (-1: a parameter).

    **Raises:** `ParameterError` for a name that is neither, naming the closest valid ones.
    """
    valid = system.param_names + system.inputs
    if not names:
        raise ParameterError(f"{what} names no parameter or input; give at least one of "
                             f"{did_you_mean('', valid) if valid else 'its parameters'}.")
    for name in names:
        if not isinstance(name, str) or name not in valid:
            raise ParameterError(f"{what} names {name!r}, which is neither a parameter nor an "
                                 f"input of {system.name!r}: {did_you_mean(str(name), valid)}.")
    pidx = tuple(system.param_names.index(w) if w in system.param_names else -1 for w in names)
    uidx = tuple(system.inputs.index(w) if w in system.inputs else -1 for w in names)
    return pidx, uidx


def device_chunk_limit(n_unknowns: int, n_devices: int) -> int | None:
    """Most samples one device may take per chunk, or None for no limit.

    jaxlib 0.10.2's batched CPU LAPACK kernels (LU, eigenvalues) split a large
    batch over XLA's intra-op thread pool and block a pool thread while they
    wait; when as many such calls run at once as the pool has threads, the
    process deadlocks (DEVELOPERS.md, "Known limits and findings": the bullets
    on the hang of batched linear algebra and on several CPU devices; and
    "Batched runs on several devices and hosts").  On one device adlin's scheduler flag keeps a
    program's LAPACK calls from overlapping, but several CPU devices run their
    programs at the same time.  The split happens only above a cost of about
    batch * n^3 ~ 1e6 (measured: 15x15 solves hung at 300 per device, never at
    256), so each device's batch was kept at 2e5 / n^3 samples; the whole demo
    program (solves and eigenvalues) then hung at 59 per device, so the budget
    is now 1e5 / n^3 (29 for the demo).  Found by experiment, not documented
    by jaxlib: retest with a newer jaxlib.
    """
    if n_devices <= 1 or jax.devices()[0].platform != "cpu":
        return None
    return max(1, _PARALLEL_LAPACK_BUDGET // max(1, n_unknowns) ** 3)


def chunk_size(requested: int | None, n_samples: int, n_devices: int, n_unknowns: int) -> int:
    """Samples per chunk: a multiple of the device count, within the LAPACK limit.

    Without a request: the samples per device rounded up to a power of two
    (so runs of similar size reuse one compiled shape), at most 2048 per device.
    """
    if requested is not None:
        if int(requested) != requested or requested < 1:
            raise ParameterError(f"chunk must be a whole number of samples >= 1, got "
                                 f"{requested!r}.")
        per_device = max(1, math.ceil(int(requested) / n_devices))
    else:
        per_device = min(_DEFAULT_PER_DEVICE, 1 << max(0, math.ceil(math.log2(
            max(1, math.ceil(n_samples / n_devices))))))
    limit = device_chunk_limit(n_unknowns, n_devices)
    if limit is not None:
        per_device = min(per_device, limit)
    return per_device * n_devices


@functools.lru_cache(maxsize=32)
def _program(compiled, param_index: tuple[int, ...], input_index: tuple[int, ...],
             quantities: tuple[AbstractQuantity, ...], targets: tuple,
             plans: FastPlans | None = None):
    """jit(vmap(one sample)), built once per compiled System, names, quantities, targets
    and solver plans (None: the general solvers; see `adlin._design.fast_path`)."""
    pi = np.asarray(param_index)
    ui = np.asarray(input_index)
    p_cols, p_at = np.flatnonzero(pi >= 0), pi[pi >= 0]
    u_cols, u_at = np.flatnonzero(ui >= 0), ui[ui >= 0]
    qdtype = jnp.complex128 if any(q.complex_valued for q in quantities) else jnp.float64

    def one(v, u0, p0, x0, refs):
        p = p0.at[p_at].set(v[p_cols]) if len(p_at) else p0
        u = u0.at[u_at].set(v[u_cols]) if len(u_at) else u0
        if plans is None:
            op = compiled.solve(u, p, x0)
            lin = compiled.linearize(op.x, u, p)
            poles = lin.poles()
        else:
            op, lin, poles = plans.solve_point(compiled, u, p, x0)
        qs = jnp.zeros((0,), qdtype)
        if quantities:
            qs = jnp.stack([jnp.asarray(q.value(op, lin, refs[i]), qdtype)
                            for i, q in enumerate(quantities)])
        met = jnp.zeros((0,), bool)
        if targets:
            met = jnp.stack([jnp.asarray(t.met(op, lin), bool) for t in targets])
        finite = (jnp.all(jnp.isfinite(op.x)) & jnp.all(jnp.isfinite(poles))
                  & jnp.all(jnp.isfinite(qs)))
        ok = op.converged & finite
        status = jnp.where(op.converged & ~finite, NON_FINITE_RESULT, op.status)
        # a failed sample's numbers mean nothing: NaN, flagged by `converged` and `status`
        x = jnp.where(ok, op.x, jnp.nan)
        poles = jnp.where(ok, poles, jnp.nan)
        qs = jnp.where(ok, qs, jnp.nan)
        return x, poles, ok, status, qs, met & ok

    return jax.jit(jax.vmap(one, in_axes=(0, None, None, None, None)))


@dataclasses.dataclass(frozen=True)
class BatchOutput:
    """Host arrays of one batched run (one row per sample)."""

    x: np.ndarray
    poles: np.ndarray
    converged: np.ndarray
    status: np.ndarray
    quantities: np.ndarray
    target_met: np.ndarray
    quantity_names: tuple[str, ...]
    quantity_units: tuple[str, ...]
    target_names: tuple[str, ...]
    n_devices: int
    chunk: int


def _placement(devices: Sequence[Any]):
    """Where a chunk goes: one device, or a one-axis mesh sharding over several."""
    if len(devices) == 1:
        return devices[0]
    mesh = jax.make_mesh((len(devices),), ("batch",), axis_types=(AxisType.Auto,),
                         devices=devices)
    return NamedSharding(mesh, PartitionSpec("batch"))


def _put(chunk: np.ndarray, where) -> jax.Array:
    """The chunk on its device(s).  On several hosts every process holds every
    sample (the same key stream), and hands JAX the rows of its own devices."""
    if jax.process_count() == 1 or not isinstance(where, NamedSharding):
        return jax.device_put(chunk, where)
    index = where.addressable_devices_indices_map(chunk.shape)
    rows = sorted({(s[0].start or 0, s[0].stop or chunk.shape[0]) for s in index.values()})
    local = np.concatenate([chunk[a:b] for a, b in rows])
    return jax.make_array_from_process_local_data(where, local, chunk.shape)


def _fetch(out) -> list[np.ndarray]:
    if jax.process_count() > 1:
        from jax.experimental import multihost_utils

        out = multihost_utils.process_allgather(out, tiled=True)
    return [np.asarray(a) for a in jax.device_get(out)]


def resolve_devices(devices) -> list[Any]:
    """The devices to use: all of `jax.devices()` by default."""
    devs = list(jax.devices() if devices is None else devices)
    if not devs:
        raise ParameterError("devices=[] names no device; leave it out to use all of "
                             "jax.devices().")
    return devs


def run_batch(
    system: System,
    names: tuple[str, ...],
    values: np.ndarray,
    *,
    inputs: Mapping[str, Any] | None,
    params: Mapping[str, Any] | None,
    of: Sequence[AbstractQuantity | str],
    targets,
    chunk: int | None,
    devices,
    progress: Callable[[int, int], Any] | None,
    what: str,
    fast_solves: bool | None = None,
) -> BatchOutput:
    """Evaluate every row of `values` (columns: `names`) in chunks.

    **Arguments:** as `adlin.sweep` (`what` names the calling function in
    messages).

    **Returns:** a `BatchOutput`.

    **Raises:** `ParameterError` (names), `AnalysisError` (quantities),
    `SteadyStateError` (no nominal operating point), `ModelError`.
    """
    from .._compile import compile

    if not isinstance(system, System):
        raise ModelError(f"{what}() needs an adlin.System, got {type(system).__name__}.")
    refuse_traced(what, inputs, params)
    pidx, uidx = resolve_names(system, names, what)
    quantities = resolve_quantities(of, system)
    labels = [q.label() for q in quantities]
    targets = as_targets(targets)
    for t in targets:
        t.validate(system)
    devs = resolve_devices(devices)

    compiled = compile(system)
    if fast_solves is None:
        fast_solves = values.shape[0] >= FAST_SOLVES_FROM
    elif not isinstance(fast_solves, bool):
        raise ParameterError(f"fast_solves must be True, False or None (automatic), got "
                             f"{fast_solves!r}.")
    # the nominal point (samples start there) and plans, remembered across runs
    op, plans = nominal_point(compiled, inputs, params, plans=fast_solves)
    refs = np.zeros(len(quantities), dtype=complex)
    if any(q.tracks_pole for q in quantities):  # a linearization costs ~4 ms
        refs, _, _ = _pole_refs(quantities, compiled.linearize(op.x, op.u, op.p),
                                COALESCE_RTOL)
    u0, p0, x0 = (np.asarray(a) for a in (op.u, op.p, op.x))
    nominal_row = np.array([p0[i] if i >= 0 else u0[j] for i, j in zip(pidx, uidx, strict=True)])

    n = values.shape[0]
    size = chunk_size(chunk, n, len(devs), system.n)
    where = _placement(devs)
    program = _program(compiled, pidx, uidx, quantities, targets, plans)
    refs = jnp.asarray(refs)

    def launch(fn, block):
        if block.shape[0] < size:  # pad with the nominal values: one compiled shape
            block = np.concatenate([block, np.tile(nominal_row, (size - block.shape[0], 1))])
        return _fetch(fn(_put(np.ascontiguousarray(block, dtype=np.float64), where),
                         u0, p0, x0, refs))

    parts: list[list[np.ndarray]] = []
    for start in range(0, n, size):
        # One chunk at a time: a second program queued behind this one gained
        # nothing in a measurement (0.46 against 0.43-0.5 s for 10,000 samples of
        # the demo) and two programs' LAPACK calls must never run at once
        # (`device_chunk_limit`).
        block = values[start:start + size]
        got = [np.array(a[:block.shape[0]]) for a in launch(program, block)]
        again = np.flatnonzero(~got[2]) if plans is not None else np.zeros(0, int)
        if again.size:
            # samples the planned program did not finish (a planned solve failed its
            # check, or the sample genuinely fails): the general solvers decide
            general = _program(compiled, pidx, uidx, quantities, targets)
            for a, b in zip(got, launch(general, block[again]), strict=True):
                a[again] = b[:again.size]
        take = block.shape[0]
        parts.append(got)
        if progress is not None:
            progress(start + take, n)
    x, poles, ok, status, qs, met = (np.concatenate(col) for col in zip(*parts, strict=True))
    return BatchOutput(
        x=x, poles=poles, converged=ok, status=status.astype(np.int64), quantities=qs,
        target_met=met, quantity_names=tuple(labels),
        quantity_units=tuple(q.unit(system) for q in quantities),
        target_names=tuple(t.describe() for t in targets), n_devices=len(devs), chunk=size,
    )

"""Results of batched runs: `SweepResult` (`adlin.sweep`) and `MonteCarloResult`
(`adlin.monte_carlo`), with their shared part `BatchResult`."""

from __future__ import annotations

import equinox as eqx
import jax.numpy as jnp
import numpy as np
from jaxtyping import Array, Bool, Complex, Float, Int

from .._errors import ParameterError, did_you_mean
from .batch import BatchOutput, status_message

_PERCENTILES = (("p1", 1.0), ("median", 50.0), ("p99", 99.0))


def _stats(values: np.ndarray) -> dict:
    """mean, std, min, p1, median, p99, max of finite values (None where there are none)."""
    v = values[np.isfinite(values)]
    row = {"count": int(v.size)}
    if v.size == 0:
        return row | {k: None for k in ("mean", "std", "min", "p1", "median", "p99", "max")}
    row |= {"mean": float(v.mean()), "std": float(v.std(ddof=1)) if v.size > 1 else 0.0,
            "min": float(v.min())}
    row |= {k: float(np.percentile(v, q)) for k, q in _PERCENTILES}
    return row | {"max": float(v.max())}


class BatchResult(eqx.Module):
    """Per-sample steady states, poles, quantities and target flags of a batch.

    - `varied_names`, `varied` (n, k): the names and values that change per sample.
    - `x` (n, nx): the unknowns (`unknown_names`) at each sample's steady state;
      NaN where the sample failed.
    - `poles` (n, r): finite poles in rad/s, sorted by magnitude as
      `LinearModel.poles`; NaN where the sample failed.
    - `converged` (n,): the steady state converged and every result is finite.
    - `status` (n,): `OperatingPoint` status codes (0 converged, 1 iteration
      limit, 2 singular Jacobian, 3 non-finite model value), or 100: converged
      but non-finite small-signal results.
    - `quantity_names`, `quantity_units`, `quantities` (n, q): the values of
      `of` (complex if a `Pole` is among them), NaN where the sample failed.
    - `target_names`, `target_met` (n, t): each target met (False where failed).
    - `n_devices`: how many devices shared the work; `chunk`: samples per chunk.
    """

    varied_names: tuple[str, ...] = eqx.field(static=True)
    varied: Float[Array, "n k"]
    x: Float[Array, "n nx"]
    poles: Complex[Array, "n r"]
    converged: Bool[Array, " n"]
    status: Int[Array, " n"]
    quantities: Array
    target_met: Bool[Array, "n t"]
    unknown_names: tuple[str, ...] = eqx.field(static=True)
    quantity_names: tuple[str, ...] = eqx.field(static=True)
    quantity_units: tuple[str, ...] = eqx.field(static=True)
    target_names: tuple[str, ...] = eqx.field(static=True)
    n_devices: int = eqx.field(static=True)
    chunk: int = eqx.field(static=True)

    @staticmethod
    def fields_from(out: BatchOutput, names: tuple[str, ...], values: np.ndarray,
                    unknowns: tuple[str, ...]) -> dict:
        """Constructor arguments shared by every result, from a `BatchOutput`."""
        return dict(
            varied_names=names, varied=jnp.asarray(values), x=jnp.asarray(out.x),
            poles=jnp.asarray(out.poles), converged=jnp.asarray(out.converged),
            status=jnp.asarray(out.status), quantities=jnp.asarray(out.quantities),
            target_met=jnp.asarray(out.target_met), unknown_names=unknowns,
            quantity_names=out.quantity_names, quantity_units=out.quantity_units,
            target_names=out.target_names, n_devices=out.n_devices, chunk=out.chunk,
        )

    @property
    def n(self) -> int:
        """Number of samples."""
        return int(self.varied.shape[0])

    def __getitem__(self, name: str) -> np.ndarray:
        """Per-sample values of a varied name, an unknown or a quantity label."""
        for names, values in ((self.varied_names, self.varied), (self.unknown_names, self.x),
                              (self.quantity_names, self.quantities)):
            if name in names:
                return np.asarray(values)[:, names.index(name)]
        valid = self.varied_names + self.unknown_names + self.quantity_names
        raise ParameterError(f"the batch has no column {name!r}: {did_you_mean(name, valid)}.")

    def failures(self) -> list[dict]:
        """The samples that failed: index, status, reason and the varied values."""
        ok = np.asarray(self.converged)
        status = np.asarray(self.status)
        varied = np.asarray(self.varied)
        return [{"index": int(i), "status": int(status[i]), "reason": status_message(status[i]),
                 "values": dict(zip(self.varied_names, map(float, varied[i]), strict=True))}
                for i in np.flatnonzero(~ok)]

    def yield_fraction(self) -> float:
        """Fraction of samples that converged and met every target (failures count as
        not met; with no targets, the fraction that converged)."""
        good = np.asarray(self.converged) & np.all(np.asarray(self.target_met), axis=1)
        return float(good.mean())

    def summary(self) -> list[dict]:
        """Statistics over the samples that converged: one row per quantity (real and
        imaginary part for complex ones) and per pole frequency |s|/2 pi in Hz.

        **Returns:** rows with name, unit, count, mean, std (sample, n - 1), min,
        p1, median, p99, max; the statistics are None when no sample converged.
        """
        ok = np.asarray(self.converged)
        rows = []
        qs = np.asarray(self.quantities)[ok]
        for j, (name, unit) in enumerate(zip(self.quantity_names, self.quantity_units,
                                             strict=True)):
            col = qs[:, j]
            if np.iscomplexobj(col) and np.any(col.imag != 0):
                rows.append({"name": f"{name} (real part)", "unit": unit} | _stats(col.real))
                rows.append({"name": f"{name} (imaginary part)", "unit": unit} | _stats(col.imag))
            else:
                rows.append({"name": name, "unit": unit} | _stats(np.real(col)))
        poles = np.asarray(self.poles)[ok]
        for k in range(poles.shape[1]):
            rows.append({"name": f"pole {k} frequency", "unit": "Hz"}
                        | _stats(np.abs(poles[:, k]) / (2 * np.pi)))
        return rows


class SweepResult(BatchResult):
    """`adlin.sweep` over a grid: the `BatchResult` fields, and

    - `shape`: the grid's shape (one axis per name for a product grid, one
      axis for zipped values); samples are in C order over it.
    - `product`: whether the grid is the Cartesian product of the values.
    """

    shape: tuple[int, ...] = eqx.field(static=True)
    product: bool = eqx.field(static=True)

    def reshape(self, values) -> np.ndarray:
        """Per-sample values (n, ...) as the grid: shape + trailing axes."""
        a = np.asarray(values)
        return a.reshape(self.shape + a.shape[1:])

    def grid(self, name: str) -> np.ndarray:
        """A name's per-sample values (varied, unknown or quantity) in the grid's shape."""
        return self.reshape(self[name])


class MonteCarloResult(BatchResult):
    """`adlin.monte_carlo`: the `BatchResult` fields, and

    - `seed`: the random seed.
    - `nominal` (k,): nominal values of the varied names.
    - `tolerances`: (name, description) of each tolerance.
    """

    seed: int = eqx.field(static=True)
    nominal: Float[Array, " k"]
    tolerances: tuple[tuple[str, str], ...] = eqx.field(static=True)

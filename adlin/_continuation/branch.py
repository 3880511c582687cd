"""Branch: a followed branch of steady states, with its folds, Hopf points and stability."""

from __future__ import annotations

import equinox as eqx
import jax
import numpy as np
from jaxtyping import Array, Bool, Complex, Float, Int

from .._errors import ParameterError, did_you_mean


class Folds(eqx.Module):
    """Fold (limit) points: the Jacobian is singular and the branch turns back.

    - `values`: parameter value at each fold.  `x`: unknowns there, (f, n).
    - `index`: the fold lies between samples `index` and `index + 1`.
    - `exact`: True when solved from the extended system (see `Branch.notes`
      for the others).
    """

    values: Float[Array, " f"]
    x: Float[Array, "f n"]
    index: Int[Array, " f"]
    exact: Bool[Array, " f"]

    def __len__(self) -> int:
        return int(np.shape(self.values)[0])


class HopfPoints(eqx.Module):
    """Hopf points: a complex pole pair crosses the imaginary axis.

    - `values`, `x`, `index`, `exact`: as for `Folds`.
    - `omega`: the crossing pair's frequency, rad/s.
    """

    values: Float[Array, " h"]
    x: Float[Array, "h n"]
    omega: Float[Array, " h"]
    index: Int[Array, " h"]
    exact: Bool[Array, " h"]

    def __len__(self) -> int:
        return int(np.shape(self.values)[0])


class Crossings(eqx.Module):
    """Points where the branch crosses requested parameter values (each located exactly).

    - `values`: the crossed value; `x`: unknowns there; `index`: between
      samples `index` and `index + 1` (or at sample `index` itself).
    """

    values: Float[Array, " c"]
    x: Float[Array, "c n"]
    index: Int[Array, " c"]

    def __len__(self) -> int:
        return int(np.shape(self.values)[0])


class Segments(eqx.Module):
    """Runs of samples with the same stability.

    - `first`, `last`: sample indices of each run (inclusive).
    - `start`, `stop`: parameter values where the run begins and ends; at a
      located fold or Hopf point between two runs, its value.
    - `stable`: the run's stability.
    """

    first: Int[Array, " s"]
    last: Int[Array, " s"]
    start: Float[Array, " s"]
    stop: Float[Array, " s"]
    stable: Bool[Array, " s"]

    def __len__(self) -> int:
        return int(np.shape(self.first)[0])


class Branch(eqx.Module):
    """A branch of steady states followed along one parameter (or input).

    Samples are in the order walked: along the branch, so the parameter goes
    back and forth through folds.

    - `values`: the parameter at each sample, (k,).
    - `x`: unknowns, (k, n).  `y`: outputs, (k, o) (empty for a bare family).
    - `poles`: finite poles of the small-signal model at each sample, rad/s,
      complex (k, r); empty when no poles were asked for.
    - `stable`: every pole strictly in the left half-plane, (k,).  With no
      poles (a static model, or a family without a poles function) nothing can
      grow and every sample counts as stable.
    - `residual`: max |f| of the corrector's last iterate at each sample.
    - `arclength`: weighted arclength from the first sample, (k,).
    - `folds`, `hopf`, `segments`, `crossings`: see their classes.
    - `param`: the parameter's name; `unknown_names`, `output_names`.
    - `complete`: True when the branch reached the stop value.
    - `reason`: why the walk ended ("reached the stop value", or where and why
      it could not continue).
    - `notes`: remarks on located points that are only approximate.

    `branch["v_out"]` gives a column (an unknown, an output, or the parameter)
    over all samples; `rows()` gives a table; `summary()` a text report.
    """

    values: Float[Array, " k"]
    x: Float[Array, "k n"]
    y: Float[Array, "k o"]
    poles: Complex[Array, "k r"]
    stable: Bool[Array, " k"]
    residual: Float[Array, " k"]
    arclength: Float[Array, " k"]
    folds: Folds
    hopf: HopfPoints
    segments: Segments
    crossings: Crossings
    param: str = eqx.field(static=True)
    unknown_names: tuple[str, ...] = eqx.field(static=True)
    output_names: tuple[str, ...] = eqx.field(static=True, default=())
    complete: bool = eqx.field(static=True, default=False)
    reason: str = eqx.field(static=True, default="")
    notes: tuple[str, ...] = eqx.field(static=True, default=())

    def __len__(self) -> int:
        return int(np.shape(self.values)[0])

    def __getitem__(self, name: str):
        def column(a, i):
            return np.asarray(a)[:, i] if not isinstance(a, jax.core.Tracer) else a[:, i]

        if name == self.param:
            return self.values if isinstance(self.values, jax.core.Tracer) else np.asarray(
                self.values)
        if name in self.unknown_names:
            return column(self.x, self.unknown_names.index(name))
        if name in self.output_names:
            return column(self.y, self.output_names.index(name))
        valid = (self.param,) + self.unknown_names + self.output_names
        raise ParameterError(f"the branch has no column {name!r}: {did_you_mean(name, valid)}.")

    @property
    def max_real_pole(self) -> np.ndarray:
        """Largest real part of the poles at each sample (rad/s; -inf with no poles)."""
        p = np.asarray(self.poles)
        if p.shape[1] == 0:
            return np.full(p.shape[0], -np.inf)
        return p.real.max(axis=1)

    def stable_ranges(self) -> list[tuple[float, float]]:
        """(start, stop) parameter values of the stable runs, in walk order."""
        s = self.segments
        return [(float(a), float(b)) for a, b, ok in
                zip(np.asarray(s.start), np.asarray(s.stop), np.asarray(s.stable), strict=True)
                if ok]

    def rows(self, names: tuple[str, ...] | list[str] | None = None):
        """A table of the samples: (header, rows).

        **Arguments:**

        - `names`: the columns after the parameter (unknowns or outputs);
          default the outputs, or the unknowns when there are none.

        **Returns:** `header`, a tuple of column names (the parameter, the
        chosen columns, "max Re(pole) [rad/s]", "stable"), and `rows`, a list
        of tuples of Python floats and a bool, one per sample.
        """
        if names is None:
            names = self.output_names or self.unknown_names
        cols = [np.asarray(self[k], dtype=float) for k in names]
        vals = np.asarray(self.values, dtype=float)
        re = self.max_real_pole
        stab = np.asarray(self.stable)
        header = (self.param, *names, "max Re(pole) [rad/s]", "stable")
        rows = [(float(vals[i]), *(float(c[i]) for c in cols), float(re[i]), bool(stab[i]))
                for i in range(len(self))]
        return header, rows

    def summary(self) -> str:
        """A few lines: extent, folds, Hopf points, stable ranges, how the walk ended."""
        lines = []
        if len(self) == 0:
            lines.append(f"empty branch in {self.param}: {self.reason}")
            return "\n".join(lines)
        vals = np.asarray(self.values)
        lines.append(f"branch in {self.param}: {len(self)} points, {self.param} from "
                     f"{vals[0]:.6g} to {vals[-1]:.6g} "
                     f"(range {vals.min():.6g} .. {vals.max():.6g})")
        for k in range(len(self.folds)):
            tag = "" if bool(self.folds.exact[k]) else " (approximate)"
            lines.append(f"  fold at {self.param} = {float(self.folds.values[k]):.10g}{tag}")
        for k in range(len(self.hopf)):
            tag = "" if bool(self.hopf.exact[k]) else " (approximate)"
            lines.append(f"  Hopf at {self.param} = {float(self.hopf.values[k]):.10g}, "
                         f"omega = {float(self.hopf.omega[k]):.6g} rad/s{tag}")
        s = self.segments
        for k in range(len(s)):
            kind = "stable" if bool(s.stable[k]) else "unstable"
            lines.append(f"  {kind} from {self.param} = {float(s.start[k]):.6g} to "
                         f"{float(s.stop[k]):.6g} (samples {int(s.first[k])}..{int(s.last[k])})")
        lines.append(f"  {'complete' if self.complete else 'incomplete'}: {self.reason}")
        lines.extend(f"  note: {n}" for n in self.notes)
        return "\n".join(lines)

    def __repr__(self) -> str:
        return (f"Branch({self.param!r}: {len(self)} points, {len(self.folds)} folds, "
                f"{len(self.hopf)} Hopf, {'complete' if self.complete else 'incomplete'}: "
                f"{self.reason})")

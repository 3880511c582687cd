"""LinearRange: how far each polarity of an input can swing within a tolerance."""

from __future__ import annotations

import math

import equinox as eqx
import numpy as np


class LinearRange(eqx.Module):
    """The largest input amplitudes, per polarity, for which the linear model
    stays within `tol` of the nonlinear circuit.

    The error at an amplitude a is max over the run of |y_nonlinear - y_linear|
    divided by the swing of the linear response (see `adlin.compare`).

    - `positive`: the largest positive amplitude found within `tol` (input
      units, e.g. V); `positive_bracket` = (within, beyond): the limit lies
      between them, to the relative `precision`.  `beyond` is `inf` when no
      amplitude up to `amplitude_max` exceeded `tol` (see `notes`).
    - `negative`: the same for negative amplitudes, as a negative number
      (the input may move down to `negative`); `negative_bracket` likewise
      negative, with `-inf` when no limit was found.
    - `limiting`: "positive" or "negative" (the polarity with the smaller
      limit in magnitude, which limits the usable symmetric swing first),
      "equal" when the brackets overlap, "none" when neither was found.
    - `amplitudes`, `errors`: every amplitude tried (signed, sorted) and its
      error: the error-versus-amplitude curve behind the limits.  A failed
      transient counts as `inf` (beyond the limit).
    - `tol`, `kind` ("step" or "sine"), `f_hz` (None for steps), `t_end` (s),
      `precision`, `input`, `output`, `notes` (what the search assumed or
      could not find).
    """

    positive: float
    negative: float
    positive_bracket: tuple[float, float]
    negative_bracket: tuple[float, float]
    limiting: str
    amplitudes: np.ndarray
    errors: np.ndarray
    tol: float
    kind: str
    f_hz: float | None
    t_end: float
    precision: float
    input: str
    output: str
    notes: tuple[str, ...]

    def curve(self, polarity: str) -> tuple[np.ndarray, np.ndarray]:
        """(|amplitude|, error) of one polarity ("positive" or "negative"), by magnitude."""
        if polarity not in ("positive", "negative"):
            raise ValueError(f"polarity must be 'positive' or 'negative', got {polarity!r}.")
        keep = self.amplitudes > 0 if polarity == "positive" else self.amplitudes < 0
        a, e = np.abs(self.amplitudes[keep]), self.errors[keep]
        order = np.argsort(a)
        return a[order], e[order]

    def __str__(self) -> str:
        def show(value, bracket):
            if math.isinf(bracket[1]):
                return f"no limit up to {abs(value):.4g}"
            return f"{value:+.4g}"

        what = "step" if self.kind == "step" else f"sine at {self.f_hz:.4g} Hz"
        lines = [f"linear range of {self.output!r} for a {what} on {self.input!r} "
                 f"(error <= {100 * self.tol:g} % of the swing, t_end {self.t_end:.3g} s)",
                 f"  positive: {show(self.positive, self.positive_bracket)}",
                 f"  negative: {show(self.negative, self.negative_bracket)}",
                 f"  limits first: {self.limiting}"]
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)

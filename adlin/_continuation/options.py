"""TrackOptions: the settings of pseudo-arclength continuation."""

from __future__ import annotations

import equinox as eqx

from .._errors import AdlinError


class TrackOptions(eqx.Module):
    """Settings of `adlin.track` (immutable, validated).

    Steps are measured along the branch in the weighted norm described in
    `adlin._continuation.arclength`; the step sizes themselves (`step`,
    `min_step`, `max_step`) are arguments of `track`, in parameter units.

    - `rtol`: relative tolerance on the corrector's residual, per equation,
      against the size of the terms in that equation (as in `NewtonOptions`).
    - `ftol`: absolute floor on residuals (A for node equations).
    - `update_tol`: the corrector has converged when its last update is below
      this in the weighted (dimensionless) norm.
    - `max_corrector_iterations`: Newton iterations per step before the step
      counts as failed and is halved.
    - `easy_iterations`: a step whose corrector needed at most this many
      iterations makes the next step `grow` times longer.
    - `grow`: step growth factor after an easy step (> 1).
    - `shrink`: step factor after a failed step (in (0, 1)).
    - `max_turn_deg`: largest angle (degrees) between successive tangents;
      a sharper turn means the step jumped or cut a corner, and it is retried
      shorter.
    - `max_locate_iterations`: secant / Newton iterations when locating a
      fold, Hopf point, crossing or the end point.
    - `voltage_scale`, `current_scale`: smallest scale (V, A) an unknown whose
      unit is V or A gets in the arclength norm; other unknowns get 1.
    """

    rtol: float = eqx.field(static=True, default=1e-9)
    ftol: float = eqx.field(static=True, default=1e-15)
    update_tol: float = eqx.field(static=True, default=1e-10)
    max_corrector_iterations: int = eqx.field(static=True, default=10)
    easy_iterations: int = eqx.field(static=True, default=3)
    grow: float = eqx.field(static=True, default=1.5)
    shrink: float = eqx.field(static=True, default=0.5)
    max_turn_deg: float = eqx.field(static=True, default=30.0)
    max_locate_iterations: int = eqx.field(static=True, default=60)
    voltage_scale: float = eqx.field(static=True, default=1.0)
    current_scale: float = eqx.field(static=True, default=1e-3)

    def __check_init__(self):
        def need(ok: bool, what: str):
            if not ok:
                raise AdlinError(f"TrackOptions: {what}.")

        need(0 < self.rtol < 1, f"rtol must be in (0, 1), got {self.rtol}")
        need(self.ftol >= 0, f"ftol must be >= 0, got {self.ftol}")
        need(0 < self.update_tol < 1, f"update_tol must be in (0, 1), got {self.update_tol}")
        need(self.max_corrector_iterations >= 2,
             f"max_corrector_iterations must be at least 2, got {self.max_corrector_iterations}")
        need(self.easy_iterations >= 1, f"easy_iterations must be >= 1, got {self.easy_iterations}")
        need(self.grow > 1, f"grow must be > 1, got {self.grow}")
        need(0 < self.shrink < 1, f"shrink must be in (0, 1), got {self.shrink}")
        need(0 < self.max_turn_deg < 90,
             f"max_turn_deg must be in (0, 90), got {self.max_turn_deg}")
        need(self.max_locate_iterations >= 1,
             f"max_locate_iterations must be >= 1, got {self.max_locate_iterations}")
        need(self.voltage_scale > 0 and self.current_scale > 0,
             "voltage_scale and current_scale must be positive")

"""IncrementTerm: an ODE term whose implicit stages are solved for increments h f.

diffrax solves the implicit stages of a first-same-as-last (FSAL) method such
as Kvaerno5 for the stage derivatives f (units of the state per second), with
the step controller's tolerances, which are in the state's own units: for a
step of h seconds the iteration then asks for h times more accuracy than the
step needs (at h = 25 us, 40,000 times), which the rounding noise of a stiff
circuit's vector field (about machine epsilon times the fastest pole times the
node voltage, 1e-3 V/s for the demo regulator) cannot give.  Declaring the
vector field "expensive" makes diffrax solve for the increments k = h f
instead (units of the state), where those tolerances mean what they say.
The price is the FSAL saving: one more evaluation per step.
"""

from __future__ import annotations

from collections.abc import Callable

import diffrax


class IncrementTerm(diffrax.AbstractTerm):
    """dy/dt = vector_field(t, y, args), with stage solves in increment form.

    **Arguments:**

    - `vector_field`: `(t, y, args) -> dy/dt`, same structure as y.
    """

    vector_field: Callable

    def vf(self, t, y, args):
        return self.vector_field(t, y, args)

    def contr(self, t0, t1, **kwargs):
        return t1 - t0

    def prod(self, vf, control):
        return vf * control

    def is_vf_expensive(self, t0, t1, y, args) -> bool:
        # True switches diffrax's Runge-Kutta stages from f-space to k-space
        # (see the module notes); no other effect on an ODE term.
        return True

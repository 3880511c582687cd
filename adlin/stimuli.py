"""Stimuli for transients, linear responses and the trust analyses.

Each stimulus is the deviation of one System input from its operating-point
value, a pure JAX function of time (s) that knows its edges (times where its
value or slope jumps) and can be scaled without recompiling::

    import adlin
    from adlin.stimuli import Step, Sine

    step = Step("v_in", 0.05, t0=1e-6)
    tone = Sine("v_in", 0.01, f_hz=1e3)

A public function's `stimulus` argument is one stimulus or a tuple of them
(stimuli on the same input add).
"""

from ._transient.stimuli import (
    AbstractStimulus,
    FromFunction,
    PiecewiseLinear,
    Pulse,
    Sine,
    Step,
    SumOfSines,
    as_stimuli,
    input_deviation,
    scale_all,
    stimulus_edges,
    stimulus_period,
)

__all__ = [
    "AbstractStimulus", "Step", "Pulse", "Sine", "SumOfSines", "PiecewiseLinear", "FromFunction",
    "as_stimuli", "input_deviation", "stimulus_edges", "stimulus_period", "scale_all",
]

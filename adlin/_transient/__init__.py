"""Nonlinear transients: stimuli, the index-1 vector field, `simulate`, `Transient`.

The package imports nothing itself: `simulate` (in `simulate.py`) brings in
diffrax (about 0.4 s), which `adlin.stimuli` and the linear responses, users
of `stimuli.py`, never need.  `adlin.simulate` and `adlin.Transient` load
their modules on first use.  (A package-level lazy `simulate` would be
shadowed by the submodule of the same name once anything imports it.)
"""

"""Nonlinear transients: stimuli, the index-1 vector field, `simulate`, `Transient`."""

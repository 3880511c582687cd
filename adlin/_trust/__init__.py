"""How far a linear model can be trusted: linear responses, comparison with
nonlinear transients, linear range and distortion."""

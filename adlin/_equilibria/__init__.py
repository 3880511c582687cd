"""Several steady states at one parameter set: deflation, source ramp, classification."""

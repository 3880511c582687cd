"""Continuation of steady states along one parameter (pseudo-arclength), with
fold and Hopf location.  The public entry point is `adlin.track`; the engine
(`track_family`) also serves other layers that follow a one-parameter family."""

"""Steady states from the branch of a source ramp (placeholder until continuation lands)."""

from __future__ import annotations


def ramp_candidates(system, u, p, x0, options):
    return [], 0

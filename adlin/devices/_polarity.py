"""Device polarity (npn/pnp, n-channel/p-channel) as a sign on voltages and currents."""

from __future__ import annotations

import numbers

from jax.typing import ArrayLike


def check_polarity(polarity: ArrayLike) -> ArrayLike:
    """Return `polarity` after checking, when it is a concrete Python number, that it is +-1.

    A complementary device (pnp, p-channel) is the mirror image of the
    n-type device: its law is the n-type law applied to the negated terminal
    voltages, with negated terminal currents and charges. A traced polarity
    cannot be checked at trace time and is used as given.
    """
    if isinstance(polarity, numbers.Number) and polarity not in (1, -1):
        raise ValueError(
            f"polarity must be +1 (npn / n-channel) or -1 (pnp / p-channel), got {polarity!r}."
        )
    return polarity

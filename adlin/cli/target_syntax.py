"""Design targets written on the command line (``--target SPEC``).

Our own short forms, one `adlin.targets` object each; numbers take SI
prefixes (``12k``, ``1M``, ``10p``):

    damping>=0.6                 MinDamping(0.6): every pole damped at least 0.6
    pair=12k,0.707               PolePair(12e3 Hz, zeta 0.707)
    pole=1k                      RealPole(1e3 Hz)
    margin<=-100                 StabilityMargin(-100 rad/s): every Re(pole) at most -100
    bandwidth:OUT/IN>=1M         Bandwidth(OUT, IN, min_hz=1e6)  (also <=F and =LOW..HIGH)
    gain:OUT/IN=10               DCGain(OUT, IN, value=10)       (also >=G, <=G, =LOW..HIGH)
    bias:NAME=LOW..HIGH          BiasLimit(NAME, LOW, HIGH)      (also >=V and <=V)

Spaces are ignored.  A malformed spec raises `CommandError` with one
sentence naming it and listing the accepted forms; names are checked
against the model later by `adlin.targets.validate`.
"""

from __future__ import annotations

import re

from .options import CommandError, parse_number

FORMS = ("damping>=0.6, pair=12k,0.707, pole=1k, margin<=-100, bandwidth:OUT/IN>=1M, "
         "gain:OUT/IN=10, bias:NAME=LOW..HIGH")

# kind[:subject] relation value; the relation is the first of >=, <=, = after the subject
_SPEC = re.compile(r"^(?P<kind>[a-z]+)(?::(?P<subject>[^<>=]+))?(?P<rel>>=|<=|=)(?P<value>.+)$")


def _bad(spec: str, why: str = "") -> CommandError:
    reason = f" ({why})" if why else ""
    return CommandError(f"--target {spec!r} is not a target{reason}; write one of: {FORMS}.")


def _number(spec: str, text: str) -> float:
    try:
        return parse_number(text)
    except ValueError:
        raise _bad(spec, f"{text!r} is not a number") from None


def parse_range(text: str) -> tuple[float, float]:
    """``'1k..100k'`` -> ``(1e3, 1e5)``.

    **Raises:** `ValueError` when `text` is not ``LOW..HIGH`` with two finite
    numbers, LOW <= HIGH.
    """
    low, sep, high = text.partition("..")
    if not sep:
        raise ValueError(text)
    lo, hi = parse_number(low), parse_number(high)
    if not lo <= hi:
        raise ValueError(text)
    return lo, hi


def _window(spec: str, rel: str, value: str) -> dict[str, float]:
    """``>=V`` -> low, ``<=V`` -> high, ``=LOW..HIGH`` -> both."""
    if rel == ">=":
        return {"low": _number(spec, value)}
    if rel == "<=":
        return {"high": _number(spec, value)}
    if ".." not in value:
        raise _bad(spec, "give =LOW..HIGH, >=LOW or <=HIGH")
    try:
        low, high = parse_range(value)
    except ValueError:
        raise _bad(spec, f"{value!r} is not LOW..HIGH with LOW <= HIGH") from None
    return {"low": low, "high": high}


def _pair(spec: str, subject: str | None) -> tuple[str, str]:
    out, sep, inp = (subject or "").partition("/")
    if not sep or not out or not inp:
        raise _bad(spec, "name the transfer as OUTPUT/INPUT")
    return out, inp


def _build(spec: str, kind: str, subject: str | None, rel: str, value: str):
    from .. import targets as T

    if kind in ("damping", "pair", "pole", "margin") and subject is not None:
        raise _bad(spec, f"{kind} takes no ':NAME'")
    if kind == "damping":
        if rel != ">=":
            raise _bad(spec, "damping is a lower bound: damping>=ZETA")
        return T.MinDamping(_number(spec, value))
    if kind == "pair":
        f, sep, zeta = value.partition(",")
        if rel != "=" or not sep:
            raise _bad(spec, "a pole pair is pair=FREQ_HZ,ZETA")
        return T.PolePair(_number(spec, f), _number(spec, zeta))
    if kind == "pole":
        if rel != "=":
            raise _bad(spec, "a real pole is pole=FREQ_HZ")
        return T.RealPole(_number(spec, value))
    if kind == "margin":
        if rel != "<=":
            raise _bad(spec, "a stability margin is an upper bound on Re(pole): margin<=RAD_S")
        return T.StabilityMargin(_number(spec, value))
    if kind == "bandwidth":
        out, inp = _pair(spec, subject)
        w = _window(spec, rel, value)
        return T.Bandwidth(out, inp, min_hz=w.get("low"), max_hz=w.get("high"))
    if kind == "gain":
        out, inp = _pair(spec, subject)
        if rel == "=" and ".." not in value:
            return T.DCGain(out, inp, value=_number(spec, value))
        return T.DCGain(out, inp, **_window(spec, rel, value))
    if kind == "bias":
        if not subject:
            raise _bad(spec, "name the quantity: bias:NAME=LOW..HIGH")
        return T.BiasLimit(subject, **_window(spec, rel, value))
    raise _bad(spec, f"unknown kind {kind!r}")


def parse_target(spec: str):
    """One ``--target`` SPEC as an `adlin.targets` object.

    **Arguments:**

    - `spec`: the text, e.g. ``"pair=12k,0.707"`` (see the module for every form).

    **Returns:** the target object.

    **Raises:** `CommandError` naming `spec` when it is malformed or its
    numbers are out of range for the target (e.g. a negative frequency).
    """
    from .._errors import ParameterError

    text = "".join(str(spec).split())
    m = _SPEC.match(text)
    if not m:
        raise _bad(spec)
    try:
        return _build(spec, m["kind"], m["subject"], m["rel"], m["value"])
    except ParameterError as err:
        # the target's own check: keep its reason, name the spec
        reason = " ".join(str(err).split()).rstrip(".")
        raise _bad(spec, reason) from None


def parse_targets(specs, system=None) -> tuple:
    """Every ``--target`` of the command line, checked against `system` when given.

    **Raises:** `CommandError` for a malformed spec; `ParameterError` (from
    `adlin.targets.validate`) for a name `system` lacks.
    """
    found = tuple(parse_target(s) for s in specs or ())
    if system is not None and found:
        from .. import targets as T

        T.validate(found, system)
    return found

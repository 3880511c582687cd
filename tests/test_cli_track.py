"""`adlin track`: the branch report of examples/tunnel_diode_bias.py.

Reference values come from the circuit's characteristic polynomial, derived
by hand from Kirchhoff's laws for a series R_S-L feed into a shunt C with a
two-terminal element of incremental conductance G_d = dI/dv:

    L C s^2 + (R_S C + L G_d) s + (1 + R_S G_d) = 0

so a fold (a real pole through zero) lies where G_d = -1/R_S, and a Hopf
point (a pair crossing the imaginary axis) where G_d = -R_S C / L, with
omega^2 = (1 + R_S G_d) / (L C) (the standard second-order criterion; e.g.
Alexander & Sadiku, Fundamentals of Electric Circuits, ch. 8, for the form
of the polynomial).  The points are then found on the diode law with
scipy.optimize.brentq, independently of adlin's continuation.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
import scipy.optimize
from tunnel_diode_reference import R_S, V_PEAK, C, L, bias_for, diode_conductance

from adlin.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "examples" / "tunnel_diode_bias.py"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

def reference_points():
    """(kind, v_bias, v_diode, omega) of the folds and Hopf points, from brentq."""
    v_min = scipy.optimize.minimize_scalar(diode_conductance, bounds=(0.1, 0.6),
                                           method="bounded").x
    out = []
    for g, kind in ((-1 / R_S, "fold"), (-R_S * C / L, "Hopf")):
        for lo, hi in ((V_PEAK, v_min), (v_min, 0.7)):
            v = scipy.optimize.brentq(lambda v, g=g: diode_conductance(v) - g, lo, hi,
                                      xtol=1e-15)
            omega = math.sqrt((1 + R_S * g) / (L * C)) if kind == "Hopf" else None
            out.append((kind, bias_for(v), v, omega))
    return out


@pytest.fixture
def no_cache(monkeypatch):
    monkeypatch.setenv("ADLIN_CACHE_DIR", "")


@pytest.fixture(scope="module")
def tracked(tmp_path_factory):
    """One run: `adlin track ... --json --plots DIR` (in-process, cache off)."""
    import os

    plots = tmp_path_factory.mktemp("branch")
    old = os.environ.get("ADLIN_CACHE_DIR")
    os.environ["ADLIN_CACHE_DIR"] = ""
    try:
        import contextlib
        import io

        buf = io.StringIO()
        with contextlib.redirect_stdout(buf):
            status = main(["track", str(EXAMPLE), "--param", "v_bias", "--from", "0",
                           "--to", "2.5", "--json", "--plots", str(plots)])
    finally:
        if old is None:
            os.environ.pop("ADLIN_CACHE_DIR", None)
        else:
            os.environ["ADLIN_CACHE_DIR"] = old
    return status, json.loads(buf.getvalue()), plots


@pytest.mark.slow
def test_track_finds_the_folds_and_hopf_points_of_the_tunnel_diode(tracked):
    status, data, _ = tracked
    assert status == 0
    assert data["complete"], data["reason"]
    found = {(p["kind"], round(p["value"], 2)): p for p in data["special_points"]}
    assert len(data["special_points"]) == 4
    for kind, v_bias, v_diode, omega in reference_points():
        match = [p for p in data["special_points"] if p["kind"] == kind
                 and abs(p["value"] - v_bias) < 1e-3]
        assert len(match) == 1, (kind, v_bias, found)
        p = match[0]
        assert p["exact"]
        assert p["value"] == pytest.approx(v_bias, rel=1e-7, abs=1e-9)
        assert p["level"] == pytest.approx(v_diode, rel=1e-6, abs=1e-9)
        if omega is not None:
            assert p["omega_rad_s"] == pytest.approx(omega, rel=1e-6)


@pytest.mark.slow
def test_track_stable_ranges_and_figure(tracked):
    _, data, plots = tracked
    runs = data["runs"]
    assert [r["stable"] for r in runs] == [True, False, True]
    # the lower stable run ends at the first Hopf point, the upper one starts at the second
    hopf = sorted(p["value"] for p in data["special_points"] if p["kind"] == "Hopf")
    assert runs[0]["stop"] == pytest.approx(hopf[1], rel=1e-9)
    assert runs[2]["start"] == pytest.approx(hopf[0], rel=1e-9)
    # every sample lies on the diode's load line: v_bias = v + R_S I(v)
    samples = data["samples"]
    v_bias = np.array([s["value"] for s in samples])
    v = np.array([s["level"] for s in samples])
    assert np.allclose(v_bias, [bias_for(x) for x in v], rtol=1e-9, atol=1e-9)
    assert v_bias.max() > hopf[1] and np.any(np.diff(v_bias) < 0)  # walked back over the S
    png = plots / "branch.png"
    assert png.read_bytes()[:8] == PNG_SIGNATURE and png.stat().st_size > 20_000
    assert data["figures"] == [str(png)]
    assert "licensed practice" in data["safety_note"]


def _one_line_error(status, err, *fragments):
    assert status == 2
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("adlin: error: "), err
    for f in fragments:
        assert f in lines[0], lines[0]


@pytest.mark.parametrize(
    ("extra", "fragments"),
    [
        (["--param", "v_bais", "--from", "0", "--to", "1"], ("v_bais", "v_bias")),
        (["--param", "v_bias", "--from", "zero", "--to", "1"], ("--from", "'zero'")),
        (["--param", "v_bias", "--from", "0", "--to", "1", "--show", "v_dode"],
         ("v_dode", "v_diode")),
        (["--param", "v_bias", "--from", "1", "--to", "1"], ("1",)),
    ],
)
def test_track_errors_are_one_sentence(extra, fragments, no_cache, capsys):
    status = main(["track", str(EXAMPLE), *extra])
    _, err = capsys.readouterr()
    _one_line_error(status, err, *fragments)


def test_track_needs_param_from_and_to(capsys):
    with pytest.raises(SystemExit) as exit_:
        main(["track", str(EXAMPLE), "--from", "0", "--to", "1"])
    assert exit_.value.code == 2
    assert "--param" in capsys.readouterr().err

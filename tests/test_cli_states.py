"""`adlin analyze` reports every steady state it finds and which one it used.

The tunnel-diode example at v_bias = 0.8 V has three steady states: the
load line v_bias = v + R_S I(v) cuts the diode's N-shaped curve three times.
Reference roots come from scipy.optimize.brentq on the diode law restated in
`tunnel_diode_reference`; the classes follow from the characteristic
polynomial L C s^2 + (R_S C + L G_d) s + (1 + R_S G_d) (see
`test_cli_track`): the middle state, where G_d < -1/R_S, has a real pole in
the right half-plane (a saddle; Strogatz, Nonlinear Dynamics and Chaos,
sec. 5.2), the outer ones are stable.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import scipy.optimize
from tunnel_diode_reference import V_PEAK, bias_for

from adlin.cli.main import main

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "tunnel_diode_bias.py"


@pytest.fixture
def no_cache(monkeypatch):
    monkeypatch.setenv("ADLIN_CACHE_DIR", "")


def analyze_json(capsys, *extra):
    status = main(["analyze", str(EXAMPLE), "--json", *extra])
    out, err = capsys.readouterr()
    assert status == 0, err
    return json.loads(out)


@pytest.mark.slow
def test_analyze_reports_three_states_and_the_one_used(no_cache, capsys):
    data = analyze_json(capsys, "--set", "v_bias=0.8")
    states = data["steady_states"]
    assert states["count"] == 3
    # reference: the three roots of v + R_S I(v) = 0.8 V, bracketed around the peak and valley
    roots = [scipy.optimize.brentq(lambda v: bias_for(v) - 0.8, lo, hi, xtol=1e-15)
             for lo, hi in ((0.0, V_PEAK), (V_PEAK, 0.4), (0.4, 0.8))]
    found = [s["values"]["v_diode"] for s in states["states"]]
    assert found == pytest.approx(roots, rel=1e-9, abs=1e-12)
    assert [s["class"] for s in states["states"]] == ["stable node", "saddle", "stable node"]
    used = states["states"][states["used"]]
    assert used["used"] and used["values"]["v_diode"] == pytest.approx(
        data["outputs"]["v_diode"]["value"], rel=1e-9)
    assert "3 steady states" in states["message"] and "--guess" in states["message"]


@pytest.mark.slow
def test_analyze_text_names_the_states_and_single_state_case(no_cache, capsys):
    status = main(["analyze", str(EXAMPLE), "--set", "v_bias=0.8"])
    out, _ = capsys.readouterr()
    assert status == 0
    assert "Steady states at these values" in out and "◀ used" in out and "saddle" in out
    data = analyze_json(capsys, "--set", "v_bias=2")
    assert data["steady_states"]["count"] == 1
    assert "only one steady state" in data["steady_states"]["message"]


def test_states_search_can_be_skipped(no_cache, capsys):
    data = analyze_json(capsys, "--set", "v_bias=2", "--states", "skip")
    assert data["steady_states"] is None

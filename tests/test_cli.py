"""The `adlin` command line, the report and the demo scenario.

The two `adlin demo` runs are real subprocesses sharing one temporary
compilation cache (the first run is cold, the second warm), collected once
per module; everything else calls `adlin.cli.main.main` in-process with the
persistent cache turned off.

The LDO checks use the closed-loop relations of negative feedback (Sedra &
Smith, Microelectronic Circuits, 7th ed., 2015, ch. 11, the general feedback
structure A_f = A / (1 + A beta) and the reduction of errors that arise in
the forward path by 1 + A beta; from memory).  With loop gain T (computed by
the demo, by series voltage injection at the amplifier input, not assumed):

- the output is v_ref (1 + R1/R2) up to a relative error of order 1/(1 + T)
  where the amplifier works near its balance point (the design load);
- more precisely, the forward path must hold the pass gate v_gate - v_mir
  away from the amplifier's balanced output, an output error of
  g_m,P R_out (v_gate - v_mir) before feedback and that divided by 1 + T after.
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import pytest

from adlin.cli.main import main, parse_assignments, parse_number

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "examples"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def run_cli(args, cache_dir, timeout=300):
    env = dict(os.environ, ADLIN_CACHE_DIR=str(cache_dir))
    return subprocess.run(
        [sys.executable, "-m", "adlin", *args],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        timeout=timeout,
    )


@pytest.fixture(scope="module")
def demo_runs(tmp_path_factory):
    """`adlin demo --json --plots DIR` (cold cache), then `adlin demo` (warm cache)."""
    base = tmp_path_factory.mktemp("demo")
    cache, plots = base / "cache", base / "plots"
    json_run = run_cli(["demo", "--json", "--plots", str(plots)], cache)
    text_run = run_cli(["demo"], cache)
    return {"json": json_run, "text": text_run, "plots": plots}


@pytest.fixture
def no_cache(monkeypatch):
    monkeypatch.setenv("ADLIN_CACHE_DIR", "")


def run_inprocess(args, capsys):
    status = main(args)
    out, err = capsys.readouterr()
    return status, out, err


def assert_one_line_error(status, err, *fragments):
    assert status == 2
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    assert lines[0].startswith("adlin: error: ")
    for fragment in fragments:
        assert fragment in lines[0], lines[0]


# -- the demo ---------------------------------------------------------------------------
def test_demo_prints_every_section(demo_runs):
    run = demo_runs["text"]
    assert run.returncode == 0, run.stderr
    assert "Traceback" not in run.stderr
    for section in (
        "Bias point",
        "Device small-signal parameters",
        "Poles",
        "Zeros  v_bat → v_out",
        "Zeros  v_ref → v_out",
        "DC small-signal gains",
        "Normalized model",
        "phase margin",
        "measure prototypes",
        "licensed practice",
    ):
        assert section in run.stdout, section
    for device in ("MP", "M1", "M2", "M3", "M4", "M5", "M6"):
        assert f"\n{device} " in run.stdout


def test_demo_json_has_bias_point_poles_and_devices(demo_runs):
    run = demo_runs["json"]
    assert run.returncode == 0, run.stderr
    data = json.loads(run.stdout)
    assert data["bias_point"]["v_out"]["unit"] == "V"
    assert data["outputs"]["v_out"]["value"] == pytest.approx(1.8, abs=0.02)
    assert len(data["poles"]) >= 3
    assert data["devices"]["MP"]["g_m"]["unit"] == "S"
    assert data["devices"]["MP"]["g_m"]["value"] > 0.01  # a 20 mA pass device
    assert {z["input"] for z in data["zeros"]} == {"v_bat", "v_ref"}
    assert data["normalized"]["time_scale_s"] > 0
    assert "licensed practice" in data["safety_note"]


def test_demo_plots_are_two_nonempty_pngs(demo_runs):
    assert demo_runs["json"].returncode == 0, demo_runs["json"].stderr
    for name in ("bode.png", "poles_zeros.png"):
        path = demo_runs["plots"] / name
        assert path.stat().st_size > 10_000
        assert path.read_bytes()[:8] == PNG_SIGNATURE
    figures = json.loads(demo_runs["json"].stdout)["figures"]
    assert sorted(Path(f).name for f in figures) == ["bode.png", "poles_zeros.png"]


def test_demo_poles_are_in_the_left_half_plane(demo_runs):
    poles = json.loads(demo_runs["json"].stdout)["poles"]
    assert all(p["real_rad_s"] < 0 for p in poles)
    assert all(p["damping"] > 0.5 for p in poles)  # well damped, not merely stable


def _predicted_error(bias, devices, params, loop_gain):
    g_out = 1 / params["R_load"] + devices["MP"]["g_ds"] + 1 / (params["R1"] + params["R2"])
    return devices["MP"]["g_m"] / g_out * (bias["v_gate"] - bias["v_mir"]) / (1 + loop_gain)


def test_ldo_output_follows_the_closed_loop_formula(demo_runs):
    data = json.loads(demo_runs["json"].stdout)
    value = {k: q["value"] for k, q in (data["params"] | data["inputs"]).items()}
    ideal = value["v_ref"] * (1 + value["R1"] / value["R2"])
    assert ideal == pytest.approx(1.8, rel=1e-12)
    loop_gain = data["notes"]["loop gain T(0)"]["value"]
    assert 30 < loop_gain < 1e4  # negative feedback with a finite, sizeable loop gain
    error = data["outputs"]["v_out"]["value"] - ideal
    # Within the loop-gain error at the design load (amplifier near balance) ...
    tolerance = ideal / (1 + loop_gain)
    assert abs(error) <= tolerance < 0.01 * ideal
    # ... and equal to the forward-path error divided by 1 + T, to first order.
    bias = {k: q["value"] for k, q in data["bias_point"].items()}
    devices = {k: q["value"] for k, q in data["devices"]["MP"].items()}
    predicted = _predicted_error(bias, {"MP": devices}, value, loop_gain)
    assert error == pytest.approx(predicted, rel=0.05)
    assert 45 < data["notes"]["phase margin"]["value"] < 90


@pytest.fixture(scope="module")
def ldo_circuit():
    from adlin.scenarios import sensor_ldo

    return sensor_ldo()  # one circuit, so its System compiles once for all loads


@pytest.mark.slow
@pytest.mark.parametrize(
    "r_load, regulates_within_loop_gain", [(60.0, True), (90.0, True), (1800.0, False)]
)
def test_ldo_api_from_light_to_full_load(r_load, regulates_within_loop_gain, ldo_circuit):
    import numpy as np

    import adlin
    from adlin.scenarios import ideal_output, predicted_error, sensor_ldo_loop

    circuit = ldo_circuit
    system = circuit.build()
    op = adlin.steady_state(system, params={"R_load": r_load})  # 30, 20 and 1 mA
    model = adlin.linearize(system, op)
    poles = np.asarray(model.poles())
    assert poles.size >= 3 and np.all(poles.real < 0)
    loop = sensor_ldo_loop(op=op, model=model)
    assert loop.phase_margin_deg > 55
    error = float(op["v_out"]) - ideal_output()
    predicted = predicted_error(op, circuit.small_signal(op), loop)
    assert error == pytest.approx(predicted, rel=0.05)
    # At light load the gate sits far from the amplifier's balance point: the
    # systematic offset, not 1/(1 + T), then sets the error.
    within = abs(error) <= ideal_output() / (1 + loop.dc)
    assert within == regulates_within_loop_gain
    # A phase margin near 60 degrees goes with a dominant pair damped near 0.6.
    pairs = [r for r in model.pole_table().roots if r.pair]
    if loop.phase_margin_deg < 75:
        assert pairs and 0.5 < pairs[0].damping < 0.8


# -- model files ----------------------------------------------------------------------
def test_analyze_rc_ladder_json_poles_scale_with_resistance(no_cache, capsys):
    status, out, err = run_inprocess(
        ["analyze", str(EXAMPLES / "rc_ladder.py"), "--json", "--set", "R=2k"], capsys
    )
    assert status == 0, err
    data = json.loads(out)
    # Poles of three equal RC sections: 0.1981, 1.555, 3.247 times -1/(RC), the
    # roots of s^3 + 5 s^2 + 6 s + 1 (s in units of 1/(RC)).
    rc = 2e3 * 10e-9
    got = sorted(-p["real_rad_s"] * rc for p in data["poles"])
    assert got == pytest.approx([0.19806226, 1.55495813, 3.24697960], rel=1e-7)
    assert data["zeros"][0]["zeros"] == []
    assert data["dc_gains"][0]["value"] == pytest.approx(1.0, rel=1e-12)


@pytest.mark.slow
def test_analyze_rc_ladder_text(no_cache, capsys):
    status, out, err = run_inprocess(["analyze", str(EXAMPLES / "rc_ladder.py")], capsys)
    assert status == 0, err
    assert "Poles" in out and "no finite zeros" in out and "licensed practice" in out


@pytest.mark.slow
@pytest.mark.parametrize("example", ["photodiode_frontend.py", "thermistor_ode.py"])
def test_analyze_other_examples(example, no_cache, capsys, tmp_path):
    status, out, err = run_inprocess(
        ["analyze", str(EXAMPLES / example), "--plots", str(tmp_path)], capsys
    )
    assert status == 0, err
    assert "Poles" in out and "DC small-signal gains" in out
    assert (tmp_path / "poles_zeros.png").stat().st_size > 10_000


# -- errors: one sentence, exit status 2, no traceback -------------------------------
def test_missing_model_file(no_cache, capsys, tmp_path):
    status, _, err = run_inprocess(["analyze", str(tmp_path / "nothing_here.py")], capsys)
    assert_one_line_error(status, err, "nothing_here.py", "does not exist")


def test_file_without_a_system(no_cache, capsys, tmp_path):
    path = tmp_path / "empty_model.py"
    path.write_text("import math\nGAIN = 3.0\n\ndef helper(x):\n    return 2 * x\n")
    status, _, err = run_inprocess(["analyze", str(path)], capsys)
    assert_one_line_error(status, err, "empty_model.py", "defines no adlin.System")


def test_syntax_error_in_model_file(no_cache, capsys, tmp_path):
    path = tmp_path / "broken.py"
    path.write_text("import adlin\nx = (1,\n")
    status, _, err = run_inprocess(["analyze", str(path)], capsys)
    assert_one_line_error(status, err, "broken.py", "syntax error on line")


def test_unknown_set_name(no_cache, capsys):
    status, _, err = run_inprocess(
        ["analyze", str(EXAMPLES / "rc_ladder.py"), "--set", "Rr=1k"], capsys
    )
    assert_one_line_error(status, err, "'Rr'", "closest valid name is 'R'")


@pytest.mark.parametrize("item", ["R", "=3", "R=abc", "R=1e999", "R=4.7 kk"])
def test_malformed_assignment(item, no_cache, capsys):
    status, _, err = run_inprocess(
        ["analyze", str(EXAMPLES / "rc_ladder.py"), "--set", item], capsys
    )
    assert_one_line_error(status, err, "--set")


def test_model_that_does_not_converge(no_cache, capsys, tmp_path):
    path = tmp_path / "no_root.py"
    path.write_text(
        "import jax.numpy as jnp\nimport adlin\n\n"
        "# exp(x) + 1 = 0 has no real solution.\n"
        "model = adlin.System(lambda x, u, p: jnp.exp(x) + 1.0, unknowns=('x',),\n"
        "                     name='no_root')\n"
    )
    status, _, err = run_inprocess(["analyze", str(path)], capsys)
    assert_one_line_error(status, err, "steady state of 'no_root' not found")


def test_several_models_need_a_choice(no_cache, capsys, tmp_path):
    path = tmp_path / "two.py"
    path.write_text(
        "import adlin\n\n"
        "def make(r):\n"
        "    c = adlin.Circuit('rc')\n"
        "    c.input('v_s', 1.0, unit='V')\n"
        "    c.voltage_source('V1', 'a', 'gnd', 'v_s')\n"
        "    c.resistor('R1', 'a', 'b', r)\n"
        "    c.capacitor('C1', 'b', 'gnd', 1e-6)\n"
        "    c.output('v_b', 'b')\n"
        "    return c\n\n"
        "fast = make(1e3)\nslow = make(1e6)\n"
    )
    status, _, err = run_inprocess(["analyze", str(path)], capsys)
    assert_one_line_error(status, err, "fast, slow", "--model NAME")
    status, out, err = run_inprocess(["analyze", str(path), "--model", "slow", "--json"], capsys)
    assert status == 0, err
    assert json.loads(out)["poles"][0]["real_rad_s"] == pytest.approx(-1.0, rel=1e-9)


def test_unknown_option_is_one_line(no_cache, capsys):
    with pytest.raises(SystemExit) as exc:
        main(["demo", "--plot-dir", "x"])
    _, err = capsys.readouterr()
    assert exc.value.code == 2
    assert len(err.strip().splitlines()) == 1 and "--plot-dir" in err


def test_debug_shows_the_exception(no_cache, capsys, tmp_path):
    from adlin import AdlinError

    with pytest.raises(AdlinError, match="does not exist"):
        main(["--debug", "analyze", str(tmp_path / "missing.py")])


def test_error_in_a_real_process_has_no_traceback(tmp_path):
    run = run_cli(["analyze", str(tmp_path / "missing.py")], "")
    assert run.returncode == 2
    assert run.stderr.count("\n") == 1 and "Traceback" not in run.stderr
    assert run.stdout == ""


# -- NAME=VALUE ----------------------------------------------------------------------
@pytest.mark.parametrize(
    "text, value",
    [
        ("4.7k", 4.7e3),
        ("2.2u", 2.2e-6),
        ("-3", -3.0),
        ("1e-9", 1e-9),
        ("10M", 1e7),
        ("5m", 5e-3),
        (" 0.5 p", 0.5e-12),
    ],
)
def test_parse_number(text, value):
    assert parse_number(text) == pytest.approx(value, rel=1e-15)


def test_parse_assignments_keeps_names():
    assert parse_assignments(["R1=10k", "v_in = 0.6"], "--set") == {"R1": 1e4, "v_in": 0.6}
    assert math.isclose(parse_assignments(["C=4.7n"], "--set")["C"], 4.7e-9)

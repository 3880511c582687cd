"""`adlin size`: sizing from the command line, checked against closed forms.

- A one-pole RC model: sizing R for a real pole at f lands on
  R = 1 / (2 pi f C) (Alexander & Sadiku, Fundamentals of Electric Circuits,
  5th ed., 2013, ch. 7, the RC time constant tau = R C).
- The photodiode front-end of examples/photodiode_tia_sizing.py: sizing R_F
  and C_F for a pole pair at 100 kHz with damping 1/sqrt(2) is checked
  (a) against the characteristic polynomial derived here in sympy from KCL
  at the inverting node and the op-amp's single-pole law, exactly, and
  (b) against the classic design rules of photodiode amplifiers,
  f = sqrt(GBW / (2 pi R_F C_D)) and the Butterworth feedback capacitance
  C_F = sqrt(C_D / (pi R_F GBW)) = sqrt(2) sqrt(C_D / (2 pi R_F GBW))
  (Graeme, Photodiode Amplifiers: Op Amp Solutions, McGraw-Hill 1996,
  ch. 2, quoted from memory; valid for C_F << C_D, here C_F / C_D = 1.4 %,
  so within 2 %).  The 45-degree rule C_F = sqrt(C_D / (2 pi R_F GBW)) is
  checked against the model's own poles: it gives damping 1/2, not 1/sqrt(2).
- Rounded values are members of the IEC 60063 E24 series (IEC 60063:2015,
  table of the E24 values, listed below).
"""

from __future__ import annotations

import functools
import importlib.util
import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import sympy as sp
from cli_harness import Terminal, run

import adlin

ROOT = Path(__file__).resolve().parents[1]
TIA = ROOT / "examples" / "photodiode_tia_sizing.py"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
SQRT_HALF = 1 / math.sqrt(2)
# IEC 60063:2015, E24 series (one decade)
E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7,
       5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)

RC_MODEL = '''
import jax.numpy as jnp
import adlin

def _f(x, u, p):
    return jnp.stack([(x[0] - u[0]) / p["R"]])

def _q(x, p):
    return jnp.stack([p["C"] * x[0]])

rc = adlin.System(_f, _q, unknowns=("v_c",), inputs={"v_in": 1.0}, outputs=("v_c",),
                  output=lambda x, u, p: x, params={"R": 1e3, "C": 10e-9},
                  units={"R": "ohm", "C": "F"}, name="rc_lowpass")
'''


def in_e24(value: float) -> bool:
    mantissa = value / 10 ** math.floor(math.log10(value) + 1e-12)
    return any(abs(mantissa - e) < 1e-9 for e in E24)


@pytest.fixture(scope="module")
def rc_model(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("models") / "rc_lowpass.py"
    path.write_text(RC_MODEL)
    return path


# -- the RC pole: fast, text report ----------------------------------------------------------
def test_rc_pole_sized_to_the_time_constant(rc_model):
    f_hz, c = 2e3, 10e-9
    status, out, err = run(["size", str(rc_model), "--free", "R=100..1M", "--target",
                            f"pole={f_hz:g}", "--starts", "2", "--iterations", "40",
                            "--round", "E24", "--json"])
    assert status == 0, err
    data = json.loads(out)
    (row,) = data["free"]
    assert row["name"] == "R" and row["unit"] == "ohm"
    assert row["final"] == pytest.approx(1 / (2 * math.pi * f_hz * c), rel=1e-4)  # 7.958 kOhm
    assert in_e24(row["rounded"]) and row["rounded"] == pytest.approx(8.2e3)  # nearest E24
    assert data["met"] is True and data["targets"][0]["met"] is True
    assert data["rounded_met"] is False  # 8.2 k puts the pole 3 % low, outside 1 %
    assert len(data["loss_history"]) == 2 and data["evaluations"] >= 2


def test_text_report_has_every_table(rc_model):
    status, out, err = run(["size", str(rc_model), "--free", "R=100..1M", "--target",
                            "pole=2k", "--starts", "1", "--round", "E12"])
    assert status == 0, err
    for text in ("Free parameters", "E12 value", "Targets", "with E12 values", "Search",
                 "real pole at 2 kHz", "measure prototypes"):
        assert text in out, text


@pytest.mark.parametrize(("argv", "message"), [
    (["--free", "R=10k..1k", "--target", "pole=1k"], "0 < LOW < HIGH"),
    (["--free", "R=0..1k", "--target", "pole=1k"], "0 < LOW < HIGH"),
    (["--free", "R=1k", "--target", "pole=1k"], "0 < LOW < HIGH"),
    (["--free", "R", "--target", "pole=1k"], "is not NAME=LOW..HIGH"),
    (["--free", "R2=1..2", "--target", "pole=1k"], "has no parameter 'R2'"),
    (["--free", "v_in=1..2", "--target", "pole=1k"], "it is an input"),
    (["--free", "R=1..2", "--free", "R=1..3", "--target", "pole=1k"], "is free already"),
    (["--target", "pole=1k"], "needs at least one free parameter"),
    (["--free", "R=1..2"], "needs at least one --target"),
    (["--free", "R=1..2", "--target", "pole=fast"], "--target 'pole=fast' is not a target"),
    (["--free", "R=1..2", "--target", "gain:v_out/v_in=2"], "unknown output 'v_out'"),
    (["--free", "R=1..2", "--target", "pole=1k", "--starts", "0"], "at least 1 start"),
    (["--free", "R=1..2", "--target", "pole=1k", "--round", "E48"], "invalid choice"),
])
def test_bad_input_exits_2_with_one_sentence(rc_model, argv, message):
    status, out, err = run(["size", str(rc_model), *argv])
    assert status == 2 and out == ""
    assert message in err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("adlin")


# -- the photodiode front-end ----------------------------------------------------------------
@functools.cache
def tia_polynomial():
    """(a2, a1, a0)(R_F, C_F, C_D, A0, GBW) of the closed loop, derived in sympy from KCL at
    the inverting node and A(s) = A0 / (1 + s A0 / (2 pi GBW)) (no adlin involved)."""
    s, c_d, c_f, r_f, a0, gbw = sp.symbols("s C_D C_F R_F A0 GBW", positive=True)
    tau = a0 / (2 * sp.pi * gbw)
    m = sp.Matrix([[s * (c_d + c_f) + 1 / r_f, -(s * c_f + 1 / r_f)], [a0, 1 + s * tau]])
    coeffs = sp.Poly(sp.expand(m.det() * r_f), s).all_coeffs()
    return sp.lambdify((r_f, c_f, c_d, a0, gbw), coeffs)


def pair(r_f, c_f, c_d=100e-12, a0=1e5, gbw=10e6) -> tuple[float, float]:
    """Natural frequency (Hz) and damping of the closed-loop pole pair (sympy polynomial)."""
    a2, a1, a0_ = (float(v) for v in tia_polynomial()(r_f, c_f, c_d, a0, gbw))
    w = math.sqrt(a0_ / a2)
    return w / (2 * math.pi), a1 / (2 * math.sqrt(a0_ * a2))


@functools.cache
def example():
    spec = importlib.util.spec_from_file_location("photodiode_tia_sizing", TIA)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def model_damping(system, **params) -> float:
    """Damping of the model's own poles (adlin.linearize), for the classic-rule checks."""
    op = adlin.steady_state(system, params=params)
    poles = np.asarray(adlin.linearize(system, op).poles())
    return float(np.min(-poles.real / np.abs(poles)))


def test_classic_rules_against_the_models_own_poles():
    ex = example()
    r_f = 1e6
    # 45-degree rule: damping 1/2; Butterworth (sqrt(2) larger): 1/sqrt(2); both within
    # the C_F << C_D approximation (C_F / C_D about 1-2 % here)
    c45 = math.sqrt(ex.C_D / (2 * math.pi * r_f * ex.GBW))
    assert model_damping(ex.tia, R_F=r_f, C_F=c45) == pytest.approx(0.5, rel=0.02)
    c_flat = ex.classic_feedback_capacitance(r_f)
    assert c_flat == pytest.approx(math.sqrt(2) * c45, rel=1e-12)
    assert model_damping(ex.tia, R_F=r_f, C_F=c_flat) == pytest.approx(SQRT_HALF, rel=0.02)
    assert pair(r_f, c_flat)[1] == pytest.approx(model_damping(ex.tia, R_F=r_f, C_F=c_flat),
                                                 rel=1e-9)


@pytest.fixture(scope="module")
def tia_run(tmp_path_factory):
    plots = tmp_path_factory.mktemp("size")
    status, out, err = run(["size", str(TIA), "--free", "R_F=100k..10M", "--free",
                            "C_F=0.1p..20p", "--target", "pair=100k,0.707", "--round", "E24",
                            "--json", "--plots", str(plots)])
    assert status == 0, err
    data = json.loads(out)
    return {r["name"]: r for r in data["free"]}, data, plots


def test_photodiode_sized_for_a_flat_response(tia_run):
    free, data, _ = tia_run
    r_f, c_f = free["R_F"]["final"], free["C_F"]["final"]
    f_n, zeta = pair(r_f, c_f)  # exact, from the sympy polynomial
    assert f_n == pytest.approx(100e3, rel=1e-5)
    assert zeta == pytest.approx(0.707, rel=1e-5)
    assert data["met"] is True
    # classic rules, valid for C_F << C_D: within 2 % here
    ex = example()
    assert c_f / ex.C_D < 0.02
    assert c_f == pytest.approx(ex.classic_feedback_capacitance(r_f), rel=0.02)
    assert r_f == pytest.approx(ex.classic_feedback_resistance(100e3), rel=0.02)
    assert ex.classic_bandwidth_hz(r_f) == pytest.approx(100e3, rel=0.02)


def test_photodiode_rounded_to_e24_and_rechecked(tia_run):
    free, data, _ = tia_run
    for row in free.values():
        assert in_e24(row["rounded"])
        assert abs(math.log(row["rounded"] / row["final"])) < math.log(1.1)  # E24 steps < 10 %
    f_n, zeta = pair(free["R_F"]["rounded"], free["C_F"]["rounded"])
    (target,) = data["targets"]
    assert f"{zeta:.4g}" in target["rounded_achieved"]  # the re-check is the model's, exactly
    assert target["rounded_met"] is (abs(f_n / 100e3 - 1) <= 0.01 and abs(zeta - 0.707) <= 0.01)


def test_figures_are_written(tia_run):
    _, data, plots = tia_run
    assert sorted(Path(p).name for p in data["figures"]) == ["loss_history.png", "pole_path.png"]
    for name in ("loss_history.png", "pole_path.png"):
        assert (plots / name).read_bytes()[:8] == PNG_SIGNATURE


@pytest.mark.slow
def test_example_runs_as_a_script():
    done = subprocess.run([sys.executable, str(TIA)], capture_output=True, text=True,
                          timeout=300, env={**os.environ, "ADLIN_CACHE_DIR": ""})
    assert done.returncode == 0, done.stderr
    assert "targets met" in done.stdout and "classic:" in done.stdout


def test_progress_bar_is_fed_by_the_callbacks(rc_model):
    err = Terminal()
    status, _, _ = run(["size", str(rc_model), "--free", "R=100..1M", "--target", "pole=2k",
                         "--starts", "2", "--iterations", "5"], err=err)
    assert status == 0, err.getvalue()


def test_pole_path_marks_pole_placement_targets():
    # A pole pair at natural frequency w and damping zeta sits at
    # -zeta w +- j w sqrt(1 - zeta^2) (Ogata, Modern Control Engineering, 5th
    # ed., sec. 5-3); a real pole at f Hz at -2 pi f.
    from adlin import targets
    from adlin.report.sizing import target_pole_positions

    got = target_pole_positions([targets.PolePair(1e3, 0.5), targets.RealPole(10.0),
                                 targets.MinDamping(0.7)])
    w = 2 * np.pi * 1e3
    want = [complex(-0.5 * w, w * np.sqrt(0.75)), complex(-0.5 * w, -w * np.sqrt(0.75)),
            complex(-2 * np.pi * 10.0, 0.0)]
    assert sorted(got, key=lambda z: (z.real, z.imag)) == pytest.approx(
        sorted(want, key=lambda z: (z.real, z.imag)), rel=1e-12)

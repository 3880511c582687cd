"""`adlin check` on the diode clipper example, against its closed-form static transfer.

The clipper (`examples/diode_clipper.py`) is a source, R_1 and a Shockley
diode to ground, buffered onto an RC filter.  The clip node has no storage,
so it follows the source at once and its voltage is the diode-with-series-
resistor closed form in the Lambert W function (Banwell & Jayakumar,
Electronics Letters 36(4), 2000; `closed_forms.diode_resistor_exact`).  The
filter behind the buffer is linear, so for a step both the nonlinear and the
linear output move along the same 1 - exp(-t/tau): the peak error over the
linear swing is |dV(a) / (g a) - 1| with dV the static change of the clip
node and g the small-signal gain, and brentq on that gives the limits each
reported bracket must contain.

Harmonics: a memoryless nonlinearity v = v0 + c1 x + c2 x^2 + c3 x^3 driven by
x = a cos(wt) has, to leading order, HD2 = c2 a / (2 c1) and
HD3 = c3 a^2 / (4 c1) (Sansen, "Distortion in elementary transistor
circuits", IEEE Trans. Circuits Syst. II 46(3), 1999); the linear filter
behind the buffer scales the k-th harmonic by |H(j k w)| / |H(j w)|.  The
Taylor coefficients c_k come from mpmath's derivatives of the Lambert W
closed form.
"""

from __future__ import annotations

import functools
import json
import math
import os
from pathlib import Path

import mpmath
import pytest
import scipy.constants as const
import scipy.optimize as so
from closed_forms import diode_resistor_exact

from adlin.cli.main import main

MODEL = str(Path(__file__).resolve().parents[1] / "examples" / "diode_clipper.py")
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
# values of examples/diode_clipper.py
V_BIAS, R_1, I_S, N = 0.5, 4.7e3, 4e-9, 1.8
TAU = 1e3 * 10e-9  # R_2 C_2 of the converter's filter
VT = const.k * 300.15 / const.e  # the device laws' default temperature, CODATA k and e
F_HZ = 1e3
AMPLITUDES = (2e-3, 10e-3)
TOL = 0.01


def clip_voltage(v_sensor: float) -> float:
    return diode_resistor_exact(v_sensor, R_1, I_S, N)


def _gain() -> float:
    v0 = clip_voltage(V_BIAS)
    r_d = N * VT / ((V_BIAS - v0) / R_1 + I_S)  # Shockley small-signal resistance
    return r_d / (R_1 + r_d)


def step_error(a: float) -> float:
    """Peak error over the linear swing for a slow step of `a` (see the module notes)."""
    dv = clip_voltage(V_BIAS + a) - clip_voltage(V_BIAS)
    return abs(dv / (_gain() * a) - 1.0)


def harmonic_reference(a: float) -> tuple[float, float]:
    """Leading-order HD2, HD3 of the filter output for a sine of amplitude a."""
    mpmath.mp.dps = 40
    c1, c2, c3 = (mpmath.diff(lambda v: mpmath.mpf(clip_voltage(float(v))), V_BIAS, k,
                              h=mpmath.mpf("1e-4")) / math.factorial(k) for k in (1, 2, 3))

    def h(k):  # |H(j k w)| of the first-order filter
        return 1.0 / math.hypot(1.0, 2 * math.pi * k * F_HZ * TAU)

    hd2 = float(abs(c2) * a / (2 * abs(c1))) * h(2) / h(1)
    hd3 = float(abs(c3) * a**2 / (4 * abs(c1))) * h(3) / h(1)
    return hd2, hd3


@functools.cache
def _check_run(plots: str):
    import io
    from contextlib import redirect_stdout

    os.environ["ADLIN_CACHE_DIR"] = ""
    buf = io.StringIO()
    with redirect_stdout(buf):
        status = main(["check", MODEL, "--kind", "step", "--json", "--plots", plots,
                       "--tol", f"{100 * TOL:g}%", "--f-hz", f"{F_HZ:g}",
                       "--amplitudes", ",".join(f"{a:g}" for a in AMPLITUDES)])
    return status, buf.getvalue()


@pytest.mark.slow
def test_check_json_limits_and_figures(tmp_path_factory, monkeypatch):
    monkeypatch.setenv("ADLIN_CACHE_DIR", "")
    plots = tmp_path_factory.mktemp("check_plots")
    status, text = _check_run(str(plots))
    assert status == 0
    data = json.loads(text)
    assert data["model"] == "diode_clipper"
    assert data["input"] == {"name": "v_sensor", "unit": "V", "bias": pytest.approx(V_BIAS)}
    assert data["output"]["name"] == "v_adc"
    assert data["output"]["bias"] == pytest.approx(clip_voltage(V_BIAS), rel=1e-7)
    assert data["tol"] == pytest.approx(TOL)
    (r,) = data["linear_range"]
    assert r["kind"] == "step" and r["f_hz"] is None
    assert r["t_end_s"] == pytest.approx(10 * TAU, rel=1e-6)  # ten slowest time constants
    assert r["limits_first"] in ("positive", "negative", "equal")
    assert len(r["curve"]) >= 10
    for point in r["curve"]:
        assert set(point) == {"amplitude", "error"}

    # limits against brentq on the closed-form error; the bracket must hold it
    ref_pos = so.brentq(lambda a: step_error(a) - TOL, 1e-4, 1.0)
    ref_neg = -so.brentq(lambda a: step_error(-a) - TOL, 1e-4, 1.0)
    for bracket, ref in ((r["positive_bracket"], ref_pos), (r["negative_bracket"], ref_neg)):
        lo, hi = sorted(abs(b) for b in bracket)
        assert hi / lo <= 1.01 * 1.0001  # the default precision
        # a small allowance for the transient solver's own error (rtol 1e-8)
        assert lo * (1 - 1e-4) <= abs(ref) <= hi * (1 + 1e-4), (bracket, ref)
    assert r["positive"] == r["positive_bracket"][0] > 0 > r["negative"]
    # the curve's errors are the closed form's at every sampled amplitude
    for point in r["curve"]:
        if abs(point["amplitude"]) <= 1.0:
            assert point["error"] == pytest.approx(step_error(point["amplitude"]), rel=1e-3,
                                                   abs=1e-6)

    # distortion at the requested amplitudes, against the Taylor coefficients
    d = data["distortion"]
    assert d["f_hz"] == pytest.approx(F_HZ)
    assert [row["amplitude"] for row in d["rows"]] == pytest.approx(list(AMPLITUDES))
    for row in d["rows"]:
        hd2, hd3 = harmonic_reference(row["amplitude"])
        assert row["predicted_hd2"] == pytest.approx(hd2, rel=1e-5)
        assert row["predicted_hd3"] == pytest.approx(hd3, rel=1e-5)
        # measured: the leading-order formulas drop terms of relative order
        # (a / n VT)^2, at most 5 % at 10 mV
        assert row["measured_hd2"] == pytest.approx(hd2, rel=0.06)
        assert row["measured_hd3"] == pytest.approx(hd3, rel=0.1)

    names = sorted(os.path.basename(p) for p in data["figures"])
    assert names == ["error_vs_amplitude.png", "waveforms.png"]
    for p in data["figures"]:
        with open(p, "rb") as fh:
            assert fh.read(8) == PNG_SIGNATURE


@pytest.mark.parametrize(
    ("extra", "names"),
    [
        (["--tol", "150%"], ["--tol", "150%"]),
        (["--tol", "abc"], ["--tol", "abc"]),
        (["--input", "v_sensr"], ["v_sensr", "v_sensor"]),
        (["--output", "v_ad"], ["v_ad", "v_adc"]),
        (["--amplitudes", "1m,-2m"], ["--amplitudes", "-2m"]),
        (["--amplitudes", "1m,x"], ["--amplitudes", "x"]),
    ],
)
def test_check_bad_option_is_one_sentence(extra, names, capsys, monkeypatch):
    monkeypatch.setenv("ADLIN_CACHE_DIR", "")
    status = main(["check", MODEL, *extra])
    err = capsys.readouterr().err.strip()
    assert status == 2
    assert err.startswith("adlin: error:") and "\n" not in err
    for name in names:
        assert name in err, err


def test_waveform_panels_say_where_each_polarity_sits():
    # Both polarities are drawn at the larger limit (edge_amplitude), so the
    # polarity that limits first is beyond its own limit there; its panel
    # said "(positive)" under a title "at the edge of the linear range" while
    # showing a 2.4 % error for a 1 % tolerance (photodiode example).  The
    # numbers are that run's limits.
    import numpy as np

    from adlin._trust.range_result import LinearRange
    from adlin.report.trust import edge_amplitude, waveform_position

    r = LinearRange(positive=3.741e-6, negative=-6.976e-6,
                    positive_bracket=(3.741e-6, 3.7413e-6),
                    negative_bracket=(-6.976e-6, -6.9765e-6), limiting="positive",
                    amplitudes=np.array([1e-6]), errors=np.array([1e-3]), tol=0.01,
                    kind="step", f_hz=None, t_end=1.1e-6, precision=1e-4, input="i_photo",
                    output="v_out", notes=())
    a = edge_amplitude(r)
    assert a == pytest.approx(6.976e-6)
    assert waveform_position(r, +1.0, a) == "beyond its limit 3.741e-06"
    assert waveform_position(r, -1.0, a) == "at its limit 6.976e-06"
    open_ended = LinearRange(**{**{f: getattr(r, f) for f in r.__dataclass_fields__},
                                "negative_bracket": (-1e-5, -math.inf)})
    assert waveform_position(open_ended, -1.0, a) == "no limit found"

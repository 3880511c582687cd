"""`adlin spread`: tolerance runs from the command line, checked against probability.

Two models: a one-state model whose steady state is x = sqrt(a) (so samples
with a < 0 fail, and the spread of x over the rest has a closed form), and
the photodiode front-end of examples/photodiode_tia_sizing.py, whose
damping under a spread of C_D gives a yield computed here from the
characteristic polynomial derived in sympy.

Sources: a uniform law on [m - w, m + w] has mean m and variance w^2 / 3;
the sample mean has standard error sigma / sqrt(n), and a count of k
successes in n trials has standard deviation sqrt(n p (1 - p)) (Papoulis &
Pillai, Probability, Random Variables and Stochastic Processes, 4th ed.,
2002, ch. 4-7; quoted from memory).  Bounds are 4.5 standard errors, so a
correct implementation fails about once in 1e5 runs (and the seed is fixed).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
import scipy.optimize
import sympy as sp
from cli_harness import Terminal, run

ROOT = Path(__file__).resolve().parents[1]
TIA = ROOT / "examples" / "photodiode_tia_sizing.py"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

ROOT_MODEL = '''
import jax.numpy as jnp
import adlin

def _h(x, u, p):
    return jnp.stack([(jnp.sqrt(p["a"]) - x[0]) / p["tau"]])

root = adlin.System.from_ode(_h, states=("x",), params={"a": 1.0, "tau": 1e-3},
                             units={"x": "V", "a": "V^2", "tau": "s"}, name="square_root")
'''


@pytest.fixture(scope="module")
def root_model(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("models") / "square_root.py"
    path.write_text(ROOT_MODEL)
    return path


N = 400
WIDTH = 2.0  # a uniform in [1 - 2, 1 + 2] = [-1, 3]


@pytest.fixture(scope="module")
def root_run(root_model, tmp_path_factory):
    plots = tmp_path_factory.mktemp("spread")
    status, out, err = run(["spread", str(root_model), "--tol", f"a={WIDTH:g}", "-n", str(N),
                            "--seed", "3", "--of", "x", "--target", "bias:x>=1",
                            "--json", "--plots", str(plots)])
    assert status == 0, err
    return json.loads(out), plots


def _row(data, name):
    return next(r for r in data["summary"] if r["name"] == name)


def test_failed_samples_are_the_negative_ones_with_a_reason(root_run):
    data, _ = root_run
    p_fail = 1.0 / (2 * WIDTH)  # P(a < 0) for a uniform on [-1, 3]
    sd = math.sqrt(N * p_fail * (1 - p_fail))
    assert abs(data["failed"] - N * p_fail) < 4.5 * sd
    assert len(data["failures"]) == data["failed"]
    for f in data["failures"]:
        assert f["values"]["a"] < 0
        assert f["reason"]  # a sentence from the solver's status, not empty


def test_spread_of_x_matches_the_square_root_of_a_uniform_law(root_run):
    data, _ = root_run
    row = _row(data, "x")
    # x = sqrt(a), a uniform on [0, 3] given convergence: E[x] = (2/9) 3^1.5, E[x^2] = 1.5
    mean = 2 / 9 * 3 ** 1.5
    std = math.sqrt(1.5 - mean ** 2)
    n_ok = row["count"]
    assert n_ok == N - data["failed"]
    assert abs(row["mean"] - mean) < 4.5 * std / math.sqrt(n_ok)
    # std of a sample std, for a law with excess kurtosis k: sigma sqrt((2 + k) / (4 n));
    # k of sqrt(uniform) is below 0, so sqrt(2 / (4 n)) is a safe bound
    assert abs(row["std"] / std - 1) < 4.5 * math.sqrt(2 / (4 * n_ok))
    assert 0 <= row["min"] <= row["p1"] <= row["median"] <= row["p99"] <= row["max"] <= 3 ** 0.5
    # the pole is -1/tau whatever a is
    pole = _row(data, "pole 0 frequency")
    assert pole["mean"] == pytest.approx(1e3 / (2 * math.pi), rel=1e-9)


def test_yield_counts_failures_as_not_met(root_run):
    data, _ = root_run
    # x >= 1 <=> a >= 1: probability 2 / 4 of all samples (the failed ones count as not met)
    p = 0.5
    assert abs(data["yield"] - p) < 4.5 * math.sqrt(p * (1 - p) / N)
    assert data["targets"][0]["yield"] == data["yield"]
    assert data["tolerances"] == [{"name": "a", "unit": "V^2", "nominal": 1.0,
                                   "tolerance": "+-2 uniform"}]


def test_figures_are_written(root_run):
    data, plots = root_run
    names = sorted(Path(p).name for p in data["figures"])
    assert names == ["histograms.png", "pole_scatter.png"]
    for name in names:
        assert (plots / name).read_bytes()[:8] == PNG_SIGNATURE


def test_terminal_report(root_model):
    status, out, err = run(["spread", str(root_model), "--tol", "tau=5%:normal", "-n", "16",
                            "--of", "x"])
    assert status == 0, err
    for text in ("Tolerances", "Spread", "5 % normal", "pole 0 frequency", "measure prototypes"):
        assert text in out
    assert "Failed samples" not in out and "Yield" not in out


@pytest.mark.parametrize(("argv", "message"), [
    (["--tol", "a=1x"], "--tol 'a=1x': tolerance '1x' is not understood"),
    (["--tol", "b=1%"], "has no parameter or input 'b'"),
    (["--tol", "a"], "is not NAME=TOLERANCE"),
    (["--tol", "a=1%", "--tol", "a=2%"], "has a tolerance already"),
    ([], "needs at least one tolerance"),
    (["--tol", "a=1%", "-n", "0"], "at least 1 sample"),
    (["--tol", "a=1%", "--target", "damping>0.5"], "--target 'damping>0.5' is not a target"),
    (["--tol", "a=1%", "--target", "bias:y>=1"], "unknown quantity 'y'"),
    (["--tol", "a=1%", "--set", "q=1"], "no input or parameter 'q'"),
    (["--tol", "a=100%"], "relative tolerance must be below 100 %"),
    (["--tol", "a=1%", "--of", "gain:x"], "--of 'gain:x' is not a quantity"),
])
def test_bad_input_exits_2_with_one_sentence(root_model, argv, message):
    status, out, err = run(["spread", str(root_model), *argv])
    assert status == 2 and out == ""
    assert message in err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("adlin: error: ")


# -- the photodiode front-end: yield of a damping target under a C_D spread -----------------
def tia_damping():
    """zeta(C_D) of the front-end, from the characteristic polynomial derived in sympy from
    KCL at the inverting node and the op-amp's single-pole law (no adlin involved)."""
    s, c_d, c_f, r_f, a0, gbw = sp.symbols("s C_D C_F R_F A0 GBW", positive=True)
    tau = a0 / (2 * sp.pi * gbw)
    # [node n; op-amp] acting on (V_n, V_out) in the Laplace domain
    m = sp.Matrix([[s * (c_d + c_f) + 1 / r_f, -(s * c_f + 1 / r_f)], [a0, 1 + s * tau]])
    a2, a1, a0_ = sp.Poly(sp.expand(m.det() * r_f), s).all_coeffs()
    zeta = a1 / (2 * sp.sqrt(a0_ * a2))
    return sp.lambdify((c_d, c_f, r_f, a0, gbw), zeta)


@pytest.mark.slow
def test_photodiode_yield_of_a_damping_target_under_a_capacitance_spread(tmp_path):
    zeta = tia_damping()
    r_f, c_f, c_d, a0, gbw = 1e6, 2e-12, 100e-12, 1e5, 10e6  # the example's defaults
    threshold = 0.79
    lo, hi = 0.9 * c_d, 1.1 * c_d
    z = np.array([zeta(c, c_f, r_f, a0, gbw) for c in np.linspace(lo, hi, 50)])
    assert np.all(np.diff(z) < 0) and z[0] > threshold > z[-1]  # one crossing in range
    c_star = scipy.optimize.brentq(lambda c: zeta(c, c_f, r_f, a0, gbw) - threshold, lo, hi,
                                   xtol=1e-20)
    p = (c_star - lo) / (hi - lo)  # C_D uniform: P(zeta >= threshold) = P(C_D <= c_star)
    n = 600
    status, out, err = run(["spread", str(TIA), "--tol", "C_D=10%", "-n", str(n),
                            "--target", f"damping>={threshold}", "--of", "gain:v_out/i_photo",
                            "--of", "damping:0", "--json"])
    assert status == 0, err
    data = json.loads(out)
    assert data["failed"] == 0
    assert abs(data["yield"] - p) < 4.5 * math.sqrt(p * (1 - p) / n)
    # the pair's natural frequency at the nominal C_D: sqrt(a0 / a2) / 2 pi; the median of a
    # monotone function of a symmetric law is the function at the centre
    tau = a0 / (2 * math.pi * gbw)
    f_nominal = math.sqrt((1 + a0) / (tau * r_f * (c_d + c_f))) / (2 * math.pi)
    assert _row(data, "pole 0 frequency")["median"] == pytest.approx(f_nominal, rel=0.01)
    assert _row(data, "pole 0 damping")["median"] == pytest.approx(zeta(c_d, c_f, r_f, a0, gbw),
                                                             rel=0.01)
    # DC transimpedance -R_F A0 / (1 + A0), the same for every C_D
    gain = _row(data, "dc gain v_out/i_photo")
    assert gain["min"] == pytest.approx(-r_f * a0 / (1 + a0), rel=1e-9)
    assert gain["max"] == pytest.approx(gain["min"], rel=1e-9)


def test_progress_bar_is_fed_by_the_callbacks(root_model):
    err = Terminal()
    status, _, _ = run(["spread", str(root_model), "--tol", "tau=1%", "-n", "8"], err=err)
    assert status == 0, err.getvalue()

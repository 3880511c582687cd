"""What keeps `adlin demo` quick to start: lazy public names, host-side report arithmetic.

`import adlin` loads JAX and the float64 policy and nothing else; every
public name (`adlin.simulate`, `adlin.stimuli`, ...) is imported on first use.
The demo's own import set must not pull in diffrax, optimistix, matplotlib or
`scipy.optimize` (together about 1 s of a warm run of about 4 s on this
machine, measured with ``python -X importtime``).  The report computes the
normalized model's gains and time-constant ratios in numpy; they must equal
the library's own and the closed form of the two-section RC ladder.
"""

from __future__ import annotations

import ast
import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from closed_forms import rc_ladder

import adlin

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("diffrax", "optimistix", "matplotlib", "scipy.optimize", "sympy")


def _loaded_after(code: str) -> dict[str, bool]:
    """Which of `HEAVY` a fresh interpreter has imported after running `code`."""
    report = f"import json, sys\nprint(json.dumps({{m: m in sys.modules for m in {HEAVY!r}}}))"
    probe = f"{code}\n{report}"
    run = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True,
                         text=True, timeout=120, check=True)
    return json.loads(run.stdout.strip().splitlines()[-1])


def test_import_adlin_loads_none_of_the_heavy_packages():
    loaded = _loaded_after("import adlin")
    assert not any(loaded.values()), loaded


def test_the_demo_path_loads_none_of_the_heavy_packages():
    # The modules `adlin demo` imports without --plots (adlin/cli/main.py:
    # analyze_and_report, cmd_demo, emit_report), and the parser of every command.
    loaded = _loaded_after(
        "import adlin\n"
        "from adlin.cli.main import build_parser\n"
        "build_parser()\n"
        "import adlin.scenarios, adlin._steady.solve, adlin._linear.linearize\n"
        "import adlin.report, adlin.report.text, adlin.report.json\n"
    )
    assert not any(loaded.values()), loaded


def test_stimuli_and_linear_responses_load_no_transient_solver():
    # stimuli and the exact linear response need no ODE solver; `simulate` does
    loaded = _loaded_after("import adlin\nfrom adlin.stimuli import Step, Sine\n"
                           "adlin.linear_response\n")
    assert not loaded["diffrax"], loaded


def test_lazy_names_survive_their_modules_being_imported_first():
    # a lazy package attribute named like a submodule is shadowed by that
    # submodule once anything imports it (this broke adlin.simulate once)
    probe = ("import adlin._transient.simulate, adlin._transient.result, adlin\n"
             "assert callable(adlin.simulate) and isinstance(adlin.Transient, type)\n")
    subprocess.run([sys.executable, "-c", probe], cwd=ROOT, check=True, timeout=120)


def test_a_lazy_name_imports_its_module_on_first_use():
    loaded = _loaded_after("import adlin\nadlin.simulate")
    assert loaded["diffrax"]


def _declared_names() -> tuple[set[str], set[str]]:
    """(names in the TYPE_CHECKING block, names in _LAZY and _SUBMODULES) of adlin/__init__.py."""
    tree = ast.parse((ROOT / "adlin" / "__init__.py").read_text())
    typed: set[str] = set()
    for node in tree.body:
        if isinstance(node, ast.If) and getattr(node.test, "id", "") == "TYPE_CHECKING":
            for imp in node.body:
                typed.update(alias.asname or alias.name for alias in imp.names)
    return typed, set(adlin._LAZY) | set(adlin._SUBMODULES)


def test_every_public_name_resolves_and_is_listed():
    typed, lazy = _declared_names()
    assert typed == lazy  # the editor's view and the run-time table agree
    errors = {"AdlinError", "AnalysisError", "FloatingNodeError", "HighIndexError",
              "ModelError", "ParameterError", "SteadyStateError"}
    assert set(adlin.__all__) == lazy | errors
    star: dict = {}
    exec("from adlin import *", star)  # noqa: S102  (the star form gives every public name)
    assert set(star) - {"__builtins__"} == lazy | errors
    listed = set(dir(adlin))
    for name in sorted(lazy):
        assert name in listed, name
        assert getattr(adlin, name) is not None, name


def test_unknown_attribute_is_an_attribute_error():
    with pytest.raises(AttributeError, match="no attribute 'simulat'"):
        adlin.simulat  # noqa: B018
    from adlin import simulate, stimuli  # the from-import form goes through __getattr__

    assert simulate is adlin.simulate and stimuli.Step is adlin.stimuli.Step


def test_report_normalized_gains_and_ratios_match_the_library_and_the_closed_form():
    """Two equal RC sections: DC gain v_2/v_in = 1 and poles -(3 +- sqrt 5)/(2RC)
    (Morgan-Voyce, IRE Trans. Circuit Theory 6(3), 1959; tests/closed_forms.py), so the
    time-constant ratios are 1 and (3 - sqrt 5)/(3 + sqrt 5)."""
    from adlin.report import summarize

    system = rc_ladder(1e3, 1e-6)
    op = adlin.steady_state(system, inputs={"v_in": 2.0})
    model = adlin.linearize(system, op)
    summary = summarize(system, op, model)
    nm = model.reduce().normalize()
    gains = dict(summary.normalized.gains)
    assert gains == pytest.approx({k: float(v) for k, v in nm.gains().items()}, rel=1e-14)
    assert gains["v_2/v_in"] == pytest.approx(1.0, rel=1e-12)
    ratios = summary.normalized.time_constant_ratios
    np.testing.assert_allclose(ratios, np.asarray(nm.time_constant_ratios()), rtol=1e-14)
    np.testing.assert_allclose(ratios, [1.0, (3 - math.sqrt(5)) / (3 + math.sqrt(5))],
                               rtol=1e-12)

"""The README's tour runs as written (documentation that cannot drift)."""

import pathlib
import re

README = pathlib.Path(__file__).resolve().parent.parent / "README.md"


def _blocks():
    return re.findall(r"```python\n(.*?)```", README.read_text(), flags=re.S)


def test_readme_has_the_two_setup_commands():
    text = README.read_text()
    assert "pip install -e . && adlin demo" in text
    assert 'pip install -e ".[test]" && python -m pytest -q' in text
    assert "local electrical codes" in text


def test_readme_tour_runs():
    blocks = _blocks()
    assert len(blocks) >= 2
    namespace: dict = {}
    for code in blocks:
        exec(compile(code, str(README), "exec"), namespace)  # noqa: S102
    # the tour's claims hold: a converged bias point and a left-half-plane pole
    assert bool(namespace["op"].converged)
    assert float(namespace["dpole_dR"]) > 0  # larger R, slower pole (less negative)
    assert bool(namespace["ops"].converged.all())

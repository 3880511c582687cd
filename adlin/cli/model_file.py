"""Loading a user's model file: a Python file that defines a System.

A model file is ordinary Python.  It may define, at module level,

- an `adlin.System`,
- an `adlin.Circuit` (its device small-signal parameters then appear in the
  report), or
- a function without required arguments that returns one of these.

If the file defines exactly one System or Circuit, that is the model (a
System that is just ``circuit.build()`` of a Circuit in the same file counts
as that Circuit).  Otherwise, with no such objects, a function is called if
it is the only argument-free function of the file, or the only one whose
return annotation names System or Circuit.  In every other case
``--model NAME`` chooses.
"""

from __future__ import annotations

import inspect
import sys
import traceback
import types
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .._circuit import Circuit
from .._errors import AdlinError, did_you_mean
from .._system import System


class ModelFileError(AdlinError):
    """The model file cannot be read, run, or does not define one model."""


@dataclass(frozen=True)
class LoadedModel:
    """The model found in a file.

    - `system`: the `System` to analyze.
    - `circuit`: the `Circuit` it was built from, or None.
    - `label`: where it came from (``file.py:name``), for messages.
    """

    system: System
    circuit: Circuit | None
    label: str


def _where(err: BaseException, path: Path) -> str:
    """' (line N)' of the deepest frame inside the model file, or ''."""
    line = None
    for frame in traceback.extract_tb(err.__traceback__):
        try:
            if Path(frame.filename).resolve() == path.resolve():
                line = frame.lineno
        except OSError:  # pragma: no cover - unusual file names
            continue
    return f" (line {line})" if line else ""


def _error_text(err: BaseException) -> str:
    text = " ".join(str(err).split())
    return f"{type(err).__name__}: {text}" if text else type(err).__name__


def load_module(path: str | Path) -> types.ModuleType:
    """Run a model file as a fresh module and return it.

    **Raises:** `ModelFileError` for a missing or unreadable file, a syntax
    error, or an exception raised while the file runs (adlin's own errors
    keep their message, prefixed with the file name).
    """
    path = Path(path)
    if not path.exists():
        raise ModelFileError(
            f"model file '{path}' does not exist; check the path (relative "
            f"paths start from {Path.cwd()})."
        )
    if path.is_dir():
        raise ModelFileError(
            f"'{path}' is a directory; give the Python file that defines "
            "the model, e.g. examples/rc_ladder.py."
        )
    try:
        source = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as err:
        raise ModelFileError(f"model file '{path}' cannot be read ({_error_text(err)}).") from err
    try:
        code = compile(source, str(path), "exec")
    except SyntaxError as err:
        raise ModelFileError(
            f"model file '{path}' has a syntax error on line {err.lineno}: "
            f"{err.msg}; fix it and run again."
        ) from err
    name = "adlin_model_" + "".join(ch if ch.isalnum() else "_" for ch in path.stem)
    module = types.ModuleType(name)
    module.__file__ = str(path)
    previous = sys.modules.get(name)
    sys.modules[name] = module  # so dataclasses and pickling inside the file work
    sys.path.insert(0, str(path.resolve().parent))  # so the file can import its neighbours
    try:
        exec(code, module.__dict__)
    except AdlinError as err:
        raise ModelFileError(f"in model file '{path}'{_where(err, path)}: {err}") from err
    except Exception as err:
        raise ModelFileError(
            f"running model file '{path}' failed{_where(err, path)} with "
            f"{_error_text(err)}; run with --debug to see the traceback."
        ) from err
    finally:
        sys.path.pop(0)
        if previous is not None:
            sys.modules[name] = previous
    return module


def _factories(module: types.ModuleType) -> dict[str, Any]:
    """Functions defined in the file that can be called without arguments."""
    out = {}
    for key, obj in vars(module).items():
        if key.startswith("_") or not inspect.isfunction(obj):
            continue
        if obj.__module__ != module.__name__:
            continue
        try:
            sig = inspect.signature(obj)
        except (TypeError, ValueError):  # pragma: no cover - builtins
            continue
        required = [
            p
            for p in sig.parameters.values()
            if p.default is inspect.Parameter.empty
            and p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD, p.KEYWORD_ONLY)
        ]
        if not required:
            out[key] = obj
    return out


def _objects(module: types.ModuleType) -> dict[str, System | Circuit]:
    """Module-level Systems and Circuits, a System built from a listed Circuit dropped."""
    found = {
        k: v
        for k, v in vars(module).items()
        if not k.startswith("_") and isinstance(v, (System, Circuit))
    }
    built = set()
    for v in found.values():
        if isinstance(v, Circuit):
            try:
                built.add(id(v.build()))
            except AdlinError:
                continue
    return {k: v for k, v in found.items() if not (isinstance(v, System) and id(v) in built)}


def _as_model(obj: Any, label: str) -> LoadedModel:
    if isinstance(obj, Circuit):
        return LoadedModel(obj.build(), obj, label)
    if isinstance(obj, System):
        return LoadedModel(obj, None, label)
    raise ModelFileError(
        f"{label} is a {type(obj).__name__}, not an adlin.System or "
        "adlin.Circuit; choose another with --model NAME."
    )


def _call(fn, label: str, path: Path):
    try:
        return fn()
    except AdlinError as err:
        raise ModelFileError(f"{label}(){_where(err, path)}: {err}") from err
    except Exception as err:
        raise ModelFileError(
            f"calling {label}() failed{_where(err, path)} with "
            f"{_error_text(err)}; run with --debug to see the traceback."
        ) from err


def find_model(module: types.ModuleType, path: str | Path, name: str | None = None) -> LoadedModel:
    """Pick the model a file defines (see the module docstring for the rules).

    **Raises:** `ModelFileError` when there is none, several without `name`,
    or `name` does not exist or is not a model.
    """
    path = Path(path)
    objects = _objects(module)
    factories = _factories(module)
    if name is not None:
        if name not in vars(module) or name.startswith("__"):
            choices = list(objects) + list(factories)
            hint = did_you_mean(name, choices)
            raise ModelFileError(
                f"model file '{path}' defines no {name!r} for --model; "
                f"{hint}{'' if hint.endswith('?') else '.'}"
            )
        obj = vars(module)[name]
        label = f"{path.name}:{name}"
        if callable(obj) and not isinstance(obj, (System, Circuit, type)):
            obj = _call(obj, label, path)
        return _as_model(obj, label)
    if len(objects) == 1:
        key, obj = next(iter(objects.items()))
        return _as_model(obj, f"{path.name}:{key}")
    if len(objects) > 1:
        raise ModelFileError(
            f"model file '{path}' defines several models "
            f"({', '.join(objects)}); choose one with --model NAME."
        )
    if len(factories) == 1:
        key, fn = next(iter(factories.items()))
        label = f"{path.name}:{key}"
        return _as_model(_call(fn, label, path), label)
    annotated = {
        k: fn
        for k, fn in factories.items()
        if any(t in str(inspect.signature(fn).return_annotation) for t in ("System", "Circuit"))
    }
    if len(annotated) == 1:
        key, fn = next(iter(annotated.items()))
        label = f"{path.name}:{key}"
        return _as_model(_call(fn, label, path), label)
    if len(factories) > 1:
        raise ModelFileError(
            f"model file '{path}' defines no System or Circuit object but "
            f"several functions ({', '.join(factories)}); choose the one that "
            "returns the model with --model NAME."
        )
    raise ModelFileError(
        f"model file '{path}' defines no adlin.System or adlin.Circuit (nor a "
        "function without arguments returning one); define one at module "
        "level, e.g. model = circuit.build()."
    )


def load_model(path: str | Path, name: str | None = None) -> LoadedModel:
    """Run the file and return its model."""
    return find_model(load_module(path), path, name)

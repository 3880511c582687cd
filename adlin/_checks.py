"""Structural checks run once when a model is compiled.

Each check turns a modelling mistake into one sentence that names the
unknown, equation or parameter at fault and says what to try, before any
solver runs into it as a singular matrix or a NaN.
"""

from __future__ import annotations

import jax
import jax.numpy as jnp
import numpy as np

from ._errors import FloatingNodeError, HighIndexError, ModelError, ParameterError, did_you_mean
from ._structure import Structure, find_structure, null_spaces
from ._system import System


def _call(system: System, what: str, fn, *args):
    """Evaluate a model function, translating its Python errors into adlin ones."""
    try:
        return fn(*args)
    except KeyError as err:
        key = err.args[0] if err.args else "?"
        if isinstance(key, str):
            names = system.param_names
            raise ParameterError(
                f"the {what} function of {system.name!r} reads parameter {key!r}, which is not "
                f"declared; add it to params= or fix the name ({did_you_mean(key, names)})."
            ) from None
        raise ModelError(
            f"the {what} function of {system.name!r} raised KeyError({key!r})."
        ) from None
    except (ParameterError, ModelError):
        raise
    except IndexError as err:
        raise ModelError(
            f"the {what} function of {system.name!r} indexes beyond its arguments ({err}); "
            f"it has {system.n} unknowns {list(system.unknowns)} and "
            f"{len(system.inputs)} inputs {list(system.inputs)}."
        ) from None
    except Exception as err:  # noqa: BLE001  (user code may raise anything)
        raise ModelError(
            f"the {what} function of {system.name!r} failed: {type(err).__name__}: {err}"
        ) from err


def check_shapes(system: System) -> None:
    """Each function returns one value per declared name."""
    n, m = system.n, len(system.inputs)
    x = jax.ShapeDtypeStruct((n,), jnp.float64)
    u = jax.ShapeDtypeStruct((m,), jnp.float64)
    p = jax.ShapeDtypeStruct((len(system.param_names),), jnp.float64)
    expect = (("current", system.f, (x, u, p), (n,), "unknowns"),
              ("charge", system.q, (x, p), (n,), "unknowns"),
              ("output", system.g, (x, u, p), (len(system.outputs),), "outputs"))
    for what, fn, args, shape, label in expect:
        out = _call(system, what, jax.eval_shape, fn, *args)
        if not hasattr(out, "shape"):
            raise ModelError(f"the {what} function of {system.name!r} must return one array, "
                             f"got {type(out).__name__}.")
        if tuple(out.shape) != shape:
            names = system.unknowns if label == "unknowns" else system.outputs
            raise ModelError(
                f"the {what} function of {system.name!r} returns shape {tuple(out.shape)} but "
                f"{len(names)} {label} are declared {list(names)}; return one value per name."
            )


def matrices_at(system: System, local, x, u, p):
    """f, df/dx, dq/dx at a point, as numpy arrays, from the jitted local model."""
    f, E, A, *_ = _call(system, "current or charge", local, x, u, p)
    return np.asarray(f), -np.asarray(A), np.asarray(E)


def check_finite(system: System, f, J, E, where: str) -> None:
    """Name the first equation/unknown pair that is not finite."""
    for vec in (f,):
        bad = np.flatnonzero(~np.isfinite(vec))
        if bad.size:
            i = int(bad[0])
            raise ModelError(
                f"the current of equation {system.unknowns[i]!r} is {vec[i]} {where}; "
                "guard logs, divisions and square roots in the model, or give a guess where it "
                "is defined."
            )
    for label, M in (("current", J), ("charge", E)):
        bad = np.argwhere(~np.isfinite(M))
        if bad.size:
            i, j = (int(v) for v in bad[0])
            raise ModelError(
                f"d({label} of equation {system.unknowns[i]!r})/d({system.unknowns[j]!r}) is "
                f"{M[i, j]} {where}; the {label} law is not differentiable there (check sqrt/abs "
                "at zero, logs of non-positive values)."
            )


def test_point(system: System, local, u, p):
    """A generic, deterministic point where the model is finite (for structure checks)."""
    rng = np.random.default_rng(7)
    n = system.n
    base = rng.uniform(-0.05, 0.05, n)
    candidates = (base, np.abs(base) + 0.1, np.full(n, 0.5) + 0.1 * base)
    first = None
    for cand in candidates:
        f, J, E = matrices_at(system, local, cand, u, p)
        if first is None:
            first = (f, J, E)
        if np.all(np.isfinite(f)) and np.all(np.isfinite(J)) and np.all(np.isfinite(E)):
            return cand, f, J, E
    check_finite(system, *first, where="at a generic test point near x = 0")
    raise AssertionError("unreachable")


def _names_of(system: System, vec: np.ndarray, frac: float = 0.2) -> list[str]:
    big = np.abs(vec) >= frac * np.max(np.abs(vec))
    return [system.unknowns[i] for i in np.flatnonzero(big)]


def check_connectivity(system: System, J: np.ndarray, E: np.ndarray) -> None:
    """Every unknown must enter some equation, and the DC problem must be determined."""
    used = (np.any(J != 0, axis=0)) | (np.any(E != 0, axis=0))
    unused = [system.unknowns[i] for i in np.flatnonzero(~used)]
    if unused:
        raise FloatingNodeError(
            f"unknown {unused[0]!r} enters no equation of {system.name!r}; remove it, or connect "
            "the node it stands for to the rest of the circuit."
        )
    dc_only_storage = [system.unknowns[i] for i in np.flatnonzero(~np.any(J != 0, axis=0))]
    if dc_only_storage:
        raise FloatingNodeError(
            f"{dc_only_storage[0]!r} has no DC path: only storage elements (capacitors) connect "
            "to it, so its bias is undetermined; add a large resistor to ground or a defined "
            "bias source."
        )
    rank, right, _ = null_spaces(J)
    if rank < system.n:
        names = _names_of(system, right[:, 0])
        raise FloatingNodeError(
            f"the DC equations of {system.name!r} are singular in {', '.join(map(repr, names))}: "
            "these float together (no DC path to ground, a loop of inductors or voltage sources, "
            "or a cut-set of current sources); add a DC path, e.g. a large resistor to ground."
        )


def check_index(system: System, structure: Structure, J: np.ndarray) -> None:
    """The algebraic block must be invertible (differential index <= 1)."""
    r = structure.n_dynamic
    if r == system.n:
        return
    A = -J
    Ap = structure.left @ A @ structure.right
    A22 = Ap[r:, r:]
    rank, right, left = null_spaces(A22)
    if rank < A22.shape[0]:
        v = structure.right[:, r:] @ right[:, 0]
        names = _names_of(system, v)
        raise HighIndexError(
            f"the algebraic part of {system.name!r} is singular (index > 1) in "
            f"{', '.join(map(repr, names))}: a voltage source or inductor is tied directly across "
            "capacitors, or a loop of capacitors and voltage sources exists; add a small series "
            "resistance to break the loop."
        )


def analyze(system: System, local) -> Structure:
    """Run every compile-time check and return the dynamic/algebraic structure.

    `local` is the jitted (f, E, A, B, C, D, y) program.  It is compiled here
    and the executable is called directly, so the checks run on concrete
    numbers even when compile() is first reached inside a user's jit, vmap or
    grad (a plain call there would be staged into the outer trace).
    """
    with jax.ensure_compile_time_eval():
        u = np.asarray(system.input_vector())
        p = np.asarray(system.param_vector())
    x = jax.ShapeDtypeStruct((system.n,), jnp.float64)
    check_shapes(system)
    executable = _call(system, "current or charge", lambda: local.lower(x, u, p).compile())
    return _analyze(system, executable, u, p)


def forward_biased_point(system: System, near: np.ndarray) -> np.ndarray:
    """A point close to `near` where every declared junction sits at its critical voltage.

    Near x = 0 a junction with a tiny saturation current (1e-18 A, as in
    light-emitting diodes) conducts ~1e-17 S: numerically an open circuit,
    so a string of them looks floating although it has a DC path.  At the
    critical voltage the junction conducts about 1 S.  Least squares on the
    junction voltages, with a weak pull towards `near`, gives such a point
    whenever the junctions do not contradict each other.
    """
    index = {name: i for i, name in enumerate(system.unknowns)}
    rows, target = [], []
    for j in system.junctions:
        row = np.zeros(system.n)
        if j.anode is not None:
            row[index[j.anode]] += 1.0
        if j.cathode is not None:
            row[index[j.cathode]] -= 1.0
        rows.append(row)
        target.append(j.critical_voltage)
    pull = 1e-3
    K = np.vstack([np.asarray(rows), pull * np.eye(system.n)])
    rhs = np.concatenate([np.asarray(target), pull * near])
    return np.linalg.lstsq(K, rhs, rcond=None)[0]


def _dc_jacobian(system: System, local, x, u, p, J):
    """The Jacobian of highest rank among a few points, for the DC-path checks.

    A device law may have exactly zero slope somewhere (a square-law MOSFET
    below threshold) or a numerically zero one (a junction with a tiny
    saturation current near 0 V), so one point near x = 0 can make a node
    look floating that has a DC path once its devices conduct.  A node that
    floats, floats everywhere; so the checks use the best of: the generic
    point, a point with every declared junction at its critical voltage, and
    generic points around +-0.7 V and 1.5 V.
    """
    n = system.n
    best, best_rank = J, null_spaces(J)[0]
    if best_rank == n:
        return J
    rng = np.random.default_rng(11)
    candidates = [forward_biased_point(system, x)] if system.junctions else []
    candidates += [0.7 + 0.2 * rng.uniform(-1, 1, n), -0.7 + 0.2 * rng.uniform(-1, 1, n),
                   1.5 * rng.uniform(-1, 1, n)]
    for cand in candidates:
        _, J_c, _ = matrices_at(system, local, cand, u, p)
        if not np.all(np.isfinite(J_c)):
            continue
        rank = null_spaces(J_c)[0]
        if rank > best_rank:
            best, best_rank = J_c, rank
            if rank == n:
                break
    return best


def _analyze(system: System, local, u, p) -> Structure:
    x, f, J, E = test_point(system, local, u, p)
    del f
    J = _dc_jacobian(system, local, x, u, p, J)
    check_connectivity(system, J, E)
    structure = find_structure(E)
    check_index(system, structure, J)
    return structure

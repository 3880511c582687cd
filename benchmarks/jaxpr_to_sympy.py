"""Rebuild a JAX function as sympy expressions by interpreting its jaxpr.

This is a reference for checking derivatives, independent of JAX's automatic
differentiation: the jaxpr of ``fun(x, *consts)`` is walked equation by
equation, every floating-point intermediate becomes a sympy expression in the
symbols of ``x`` (the other arguments are substituted as constants), and the
Jacobian is then ``sympy.diff`` of each output with respect to each symbol,
evaluated with mpmath at 50 significant digits.

Each floating-point element is carried as a pair (sympy expression, mpmath
value at the evaluation point).  The value resolves every branch at that
point: ``select_n``, ``max``/``min``, ``abs``, ``sign``, ``clamp``,
comparisons, ``cond`` and ``while`` take the branch that is active there, so
the derivative of the result is the exact derivative of the active branch
(exact away from ties; ties are recorded in ``Interpretation.ties``).  An
element that does not depend on ``x`` is folded to its value (a sympy Float of
~50 digits), which keeps the expressions small; integer and boolean values are
plain numpy arrays.

``custom_jvp`` and ``custom_vjp`` functions are interpreted through their
primal function: the reference is the derivative of what the function
computes, not of the rule it declares.

    interp = interpret(f, x, u, p)          # x symbolic, u and p constant
    J = interp.jacobian()                   # numpy object array of mpmath mpf
    to_float(J)                             # float64 numpy array
"""

from __future__ import annotations

import functools
import math
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import jax
import jax.extend.core as jcore
import mpmath
import numpy as np
import sympy

DPS = 50  # decimal digits of every mpmath value and folded constant
PREC = mpmath.libmp.dps_to_prec(DPS)  # the same in bits


# -- elements ----------------------------------------------------------------


class El:
    """One floating-point scalar: sympy expression (None if constant) and value."""

    __slots__ = ("sym", "val")

    def __init__(self, sym: sympy.Expr | None, val: mpmath.mpf):
        self.sym = sym
        self.val = val

    def expr(self) -> sympy.Expr:
        if self.sym is not None:
            return self.sym
        return sympy.Float._new(self.val._mpf_, PREC)

    def __repr__(self) -> str:
        return f"El({self.sym!r}, {mpmath.nstr(self.val, 17)})"


def _const(v) -> El:
    return El(None, mpmath.mpf(v))


def _lift(sym_fn: Callable, mp_fn: Callable) -> Callable:
    """Elementwise El function from a sympy and an mpmath function."""

    def fn(*args: El) -> El:
        val = mp_fn(*(a.val for a in args))
        if all(a.sym is None for a in args):
            return El(None, val)
        return El(sym_fn(*(a.expr() for a in args)), val)

    return fn


_add = _lift(lambda a, b: a + b, lambda a, b: a + b)
_sub = _lift(lambda a, b: a - b, lambda a, b: a - b)
_mul = _lift(lambda a, b: a * b, lambda a, b: a * b)
_div = _lift(lambda a, b: a / b, lambda a, b: a / b)
_neg = _lift(lambda a: -a, lambda a: -a)


def _logistic_mp(a):
    return 1 / (1 + mpmath.exp(-a))


_UNARY: dict[str, tuple[Callable, Callable]] = {
    "exp": (sympy.exp, mpmath.exp),
    "exp2": (lambda a: sympy.Integer(2) ** a, lambda a: mpmath.power(2, a)),
    "log": (sympy.log, mpmath.log),
    "log1p": (lambda a: sympy.log(1 + a), mpmath.log1p),
    "expm1": (lambda a: sympy.exp(a) - 1, mpmath.expm1),
    "sqrt": (sympy.sqrt, mpmath.sqrt),
    "rsqrt": (lambda a: 1 / sympy.sqrt(a), lambda a: 1 / mpmath.sqrt(a)),
    "cbrt": (sympy.cbrt, mpmath.cbrt),
    "tanh": (sympy.tanh, mpmath.tanh),
    "sinh": (sympy.sinh, mpmath.sinh),
    "cosh": (sympy.cosh, mpmath.cosh),
    "asinh": (sympy.asinh, mpmath.asinh),
    "acosh": (sympy.acosh, mpmath.acosh),
    "atanh": (sympy.atanh, mpmath.atanh),
    "sin": (sympy.sin, mpmath.sin),
    "cos": (sympy.cos, mpmath.cos),
    "tan": (sympy.tan, mpmath.tan),
    "asin": (sympy.asin, mpmath.asin),
    "acos": (sympy.acos, mpmath.acos),
    "atan": (sympy.atan, mpmath.atan),
    "logistic": (lambda a: 1 / (1 + sympy.exp(-a)), _logistic_mp),
    "erf": (sympy.erf, mpmath.erf),
    "erfc": (sympy.erfc, mpmath.erfc),
    "square": (lambda a: a**2, lambda a: a * a),
    "neg": (lambda a: -a, lambda a: -a),
    "lgamma": (sympy.loggamma, mpmath.loggamma),
}

_BINARY: dict[str, tuple[Callable, Callable]] = {
    "add": (lambda a, b: a + b, lambda a, b: a + b),
    "add_any": (lambda a, b: a + b, lambda a, b: a + b),
    "sub": (lambda a, b: a - b, lambda a, b: a - b),
    "mul": (lambda a, b: a * b, lambda a, b: a * b),
    "div": (lambda a, b: a / b, lambda a, b: a / b),
    "pow": (lambda a, b: a**b, mpmath.power),
    "atan2": (sympy.atan2, mpmath.atan2),
}

_UNARY_EL = {k: _lift(*v) for k, v in _UNARY.items()}
_BINARY_EL = {k: _lift(*v) for k, v in _BINARY.items()}

_COMPARE: dict[str, Callable] = {
    "eq": lambda a, b: a == b,
    "ne": lambda a, b: a != b,
    "lt": lambda a, b: a < b,
    "le": lambda a, b: a <= b,
    "gt": lambda a, b: a > b,
    "ge": lambda a, b: a >= b,
}

# float-only primitives whose derivative is zero almost everywhere
_PIECEWISE_CONSTANT: dict[str, Callable] = {
    "floor": mpmath.floor,
    "ceil": mpmath.ceil,
    "round": lambda a: mpmath.sign(a) * mpmath.floor(abs(a) + mpmath.mpf(0.5)),  # half away from 0
    "sign": lambda a: mpmath.mpf(mpmath.sign(a)),
}

_CALL_PRIMITIVES = {
    "pjit",
    "jit",
    "closed_call",
    "core_call",
    "custom_jvp_call",
    "custom_vjp_call",
    "custom_vjp_call_jaxpr",
    "remat",
    "checkpoint",
    "remat2",
}


def _is_float(dtype) -> bool:
    return np.issubdtype(np.dtype(dtype), np.inexact)


def _obj(shape) -> np.ndarray:
    return np.empty(shape, dtype=object)


def _emap(fn: Callable, *arrays: np.ndarray) -> np.ndarray:
    """Apply fn elementwise with numpy broadcasting; result is an object array."""
    arrays = np.broadcast_arrays(*[np.asarray(a, dtype=object) for a in arrays])
    out = _obj(arrays[0].shape)
    for idx in np.ndindex(out.shape):
        out[idx] = fn(*(a[idx] for a in arrays))
    return out


def _values(a: np.ndarray) -> np.ndarray:
    """Numeric values: mpf object array for floats, the array itself otherwise."""
    if a.dtype == object:
        return _emap(lambda e: e.val, a)
    return a


# -- the interpreter -----------------------------------------------------------


@dataclass
class Interpretation:
    """Result of `interpret`: outputs as El arrays plus bookkeeping."""

    symbols: tuple[sympy.Symbol, ...]
    point: tuple[mpmath.mpf, ...]
    outputs: list[np.ndarray]
    ties: list[str] = field(default_factory=list)
    primitives: dict[str, int] = field(default_factory=dict)
    seconds: float = 0.0

    def values(self, k: int = 0) -> np.ndarray:
        """Output k's values (mpmath) at the evaluation point."""
        return _values(self.outputs[k])

    def expressions(self, k: int = 0) -> np.ndarray:
        return _emap(lambda e: e.expr(), self.outputs[k])

    def jacobian(self, k: int = 0) -> np.ndarray:
        """d output_k / d x by sympy.diff, evaluated at 50 digits (object array of mpf).

        Output k is flattened; the result has shape (output size, len(x)).
        """
        out = self.outputs[k].reshape(-1)
        n = len(self.symbols)
        J = _obj((out.size, n))
        J[...] = mpmath.mpf(0)
        subs = dict(zip(self.symbols, self.point, strict=True))
        memo: dict = {}
        with mpmath.workdps(DPS):
            for i, e in enumerate(out):
                if e.sym is None:
                    continue
                free = e.sym.free_symbols
                for j, s in enumerate(self.symbols):
                    if s not in free:
                        continue
                    d = sympy.diff(e.sym, s)
                    J[i, j] = _evaluate(d, subs, memo)
        return J


_MP_FUNCS: dict[type, Callable] = {
    sympy.exp: mpmath.exp,
    sympy.log: mpmath.log,
    sympy.tanh: mpmath.tanh,
    sympy.sinh: mpmath.sinh,
    sympy.cosh: mpmath.cosh,
    sympy.asinh: mpmath.asinh,
    sympy.acosh: mpmath.acosh,
    sympy.atanh: mpmath.atanh,
    sympy.sin: mpmath.sin,
    sympy.cos: mpmath.cos,
    sympy.tan: mpmath.tan,
    sympy.asin: mpmath.asin,
    sympy.acos: mpmath.acos,
    sympy.atan: mpmath.atan,
    sympy.atan2: mpmath.atan2,
    sympy.erf: mpmath.erf,
    sympy.erfc: mpmath.erfc,
    sympy.loggamma: mpmath.loggamma,
}


def _evaluate(expr: sympy.Expr, subs: dict, memo: dict | None = None) -> mpmath.mpf:
    """Value of expr at subs with mpmath at the working precision (memoised tree walk)."""
    memo = {} if memo is None else memo

    def ev(e):
        hit = memo.get(e)
        if hit is not None:
            return hit
        if e.is_Symbol:
            v = subs[e]
        elif e.is_Number or e.is_NumberSymbol:
            v = mpmath.mpf(e.evalf(DPS + 10)) if not isinstance(e, sympy.Float) else mpmath.mpf(e)
        elif e.is_Add:
            v = mpmath.fsum(ev(a) for a in e.args)
        elif e.is_Mul:
            v = mpmath.fprod(ev(a) for a in e.args)
        elif e.is_Pow:
            b, k = e.args
            v = mpmath.power(ev(b), int(k)) if k.is_Integer else mpmath.power(ev(b), ev(k))
        elif type(e) in _MP_FUNCS:
            v = _MP_FUNCS[type(e)](*(ev(a) for a in e.args))
        else:
            v = mpmath.mpf(sympy.lambdify(list(subs), e, modules="mpmath")(*subs.values()))
        memo[e] = v
        return v

    return ev(expr)


def to_float(a: np.ndarray) -> np.ndarray:
    """float64 copy of an object array of mpmath numbers (or of El)."""
    items = np.asarray(a, dtype=object).reshape(-1)
    flat = [float(e.val if isinstance(e, El) else e) for e in items]
    return np.array(flat, dtype=np.float64).reshape(np.shape(a))


def interpret(
    fun: Callable,
    x: Any,
    *consts: Any,
    names: Sequence[str] | None = None,
) -> Interpretation:
    """Interpret ``fun(x, *consts)`` symbolically in x at the given point.

    **Arguments:**

    - `fun`: a JAX-traceable function of a 1-D float array x and further arguments.
    - `x`: the evaluation point (1-D); each element becomes a sympy symbol.
    - `consts`: the other arguments, substituted as constants (exact float64 values).
    - `names`: optional symbol names for x.

    **Returns:** an `Interpretation`; ``.jacobian(k)`` is d(output k)/dx.

    **Raises:** NotImplementedError naming any primitive the interpreter lacks.
    """
    t0 = time.perf_counter()
    x = np.asarray(x)
    if x.ndim != 1 or not _is_float(x.dtype):
        raise ValueError("x must be a 1-D floating-point array")
    names = list(names) if names is not None else [f"x{i}" for i in range(x.size)]
    symbols = tuple(sympy.Symbol(_safe_name(nm, i), real=True) for i, nm in enumerate(names))
    point = tuple(mpmath.mpf(float(v)) for v in x)
    closed = jax.make_jaxpr(fun)(x, *consts)
    interp = _Interpreter()
    with mpmath.workdps(DPS):
        xin = _obj(x.shape)
        for i in range(x.size):
            xin[i] = El(symbols[i], point[i])
        args = [xin] + [_from_array(c) for c in jax.tree_util.tree_leaves(consts)]
        outs = interp.run(closed.jaxpr, closed.consts, args)
    return Interpretation(
        symbols=symbols,
        point=point,
        outputs=outs,
        ties=interp.ties,
        primitives=dict(sorted(interp.counts.items())),
        seconds=time.perf_counter() - t0,
    )


def _safe_name(name: str, i: int) -> str:
    clean = "".join(ch if ch.isalnum() else "_" for ch in str(name))
    if not clean or not (clean[0].isalpha()):
        clean = f"x{i}_{clean}"
    return clean


def _from_array(a: Any) -> np.ndarray:
    a = np.asarray(a)
    if _is_float(a.dtype):
        if np.iscomplexobj(a):
            raise NotImplementedError("complex values are not supported")
        return _emap(lambda v: El(None, mpmath.mpf(float(v))), a)
    return a.copy()


class _Interpreter:
    def __init__(self):
        self.ties: list[str] = []
        self.counts: dict[str, int] = {}

    # -- driver ----------------------------------------------------------
    def run(self, jaxpr, consts, args) -> list[np.ndarray]:
        if isinstance(jaxpr, jcore.ClosedJaxpr):
            consts = list(jaxpr.consts) + list(consts or [])
            jaxpr = jaxpr.jaxpr
        env: dict = {}

        def read(v):
            if isinstance(v, jcore.Literal):
                return self._literal(v)
            return env[v]

        def write(v, val):
            if isinstance(v, jcore.DropVar):
                return
            env[v] = val

        for v, c in zip(jaxpr.constvars, consts, strict=True):
            write(v, c if isinstance(c, np.ndarray) and c.dtype == object else _from_array(c))
        if len(args) != len(jaxpr.invars):
            raise ValueError(f"jaxpr takes {len(jaxpr.invars)} arguments, got {len(args)}")
        for v, a in zip(jaxpr.invars, args, strict=True):
            write(v, a)
        for eqn in jaxpr.eqns:
            name = eqn.primitive.name
            self.counts[name] = self.counts.get(name, 0) + 1
            ins = [read(v) for v in eqn.invars]
            outs = self.apply(eqn, ins)
            if not eqn.primitive.multiple_results:
                outs = [outs]
            for v, o in zip(eqn.outvars, outs, strict=True):
                write(v, self._conform(o, v.aval))
        return [read(v) for v in jaxpr.outvars]

    def _literal(self, lit) -> np.ndarray:
        return _from_array(np.asarray(lit.val, dtype=lit.aval.dtype))

    def _conform(self, value, aval) -> np.ndarray:
        """Check shape and bring ints/bools to the output dtype."""
        value = np.asarray(value, dtype=object) if not isinstance(value, np.ndarray) else value
        if tuple(value.shape) != tuple(aval.shape):
            raise AssertionError(f"shape {value.shape} != {aval.shape}")
        if _is_float(aval.dtype):
            if value.dtype != object:
                value = _from_array(value.astype(np.float64))
            return value
        if value.dtype == object:
            value = _emap(lambda e: e.val if isinstance(e, El) else e, value)
        return value.astype(np.dtype(aval.dtype))

    # -- dispatch ----------------------------------------------------------
    def apply(self, eqn, ins):
        name = eqn.primitive.name
        p = eqn.params
        out_aval = eqn.outvars[0].aval if eqn.outvars else None
        out_float = getattr(out_aval, "dtype", None) is not None and _is_float(out_aval.dtype)

        if name in _CALL_PRIMITIVES:
            for key in ("jaxpr", "call_jaxpr", "fun_jaxpr"):
                sub = p.get(key)
                if isinstance(sub, (jcore.ClosedJaxpr, jcore.Jaxpr)):
                    return self.run(sub, [], ins)
            raise NotImplementedError(f"call primitive {name!r} without a jaxpr parameter")
        if name == "cond":
            index, *ops = ins
            k = int(np.clip(int(np.asarray(_values(index)).reshape(())), 0, len(p["branches"]) - 1))
            return self.run(p["branches"][k], [], ops)
        if name == "while":
            return self._while(p, ins)
        if name == "scan":
            return self._scan(p, ins)

        if name in _UNARY_EL and out_float:
            return _emap(_UNARY_EL[name], ins[0])
        if name in _BINARY_EL and out_float:
            return _emap(_BINARY_EL[name], *ins)
        if name == "integer_pow":
            y = int(p["y"])
            if out_float:
                return _emap(_lift(lambda a: a**y, lambda a: mpmath.power(a, y)), ins[0])
            return np.asarray(ins[0]) ** y
        if name in _PIECEWISE_CONSTANT and out_float:
            return _emap(lambda a: El(None, _PIECEWISE_CONSTANT[name](a.val)), ins[0])
        if name == "abs" and out_float:
            return _emap(self._abs, ins[0])
        if name in ("max", "min") and out_float:
            return _emap(functools.partial(self._minmax, name), *ins)
        if name == "clamp" and out_float:
            lo, xv, hi = ins
            return _emap(lambda a, b, c: self._minmax("min", self._minmax("max", a, b), c),
                         xv, lo, hi)
        if name == "rem" and out_float:
            return _emap(self._rem, *ins)
        if name in _COMPARE:
            a, b = (_values(v) for v in ins)
            if a.dtype == object or b.dtype == object:
                self._note_near_ties(name, ins)
            return _emap(_COMPARE[name], a, b).astype(bool)
        if name == "is_finite":
            return _emap(lambda e: bool(mpmath.isfinite(e.val)), ins[0]).astype(bool)
        if name == "select_n":
            return self._select_n(ins[0], ins[1:])
        if name == "convert_element_type":
            return self._convert(ins[0], p["new_dtype"])
        if name in ("copy", "copy_p", "optimization_barrier", "reduce_precision"):
            return ins if eqn.primitive.multiple_results else ins[0]
        if name == "stop_gradient":
            return _emap(lambda e: El(None, e.val), ins[0])

        # integer / boolean arithmetic: exact numpy
        if not out_float and name in _INT_OPS:
            return _INT_OPS[name](*[np.asarray(v) for v in ins])

        # structure
        if name == "slice":
            strides = p["strides"] or (1,) * len(p["start_indices"])
            bounds = zip(p["start_indices"], p["limit_indices"], strides, strict=True)
            idx = tuple(slice(s, e, st) for s, e, st in bounds)
            return ins[0][idx].copy()
        if name == "squeeze":
            return np.squeeze(ins[0], axis=tuple(p["dimensions"])).copy()
        if name == "expand_dims":
            return np.expand_dims(ins[0], tuple(p["dimensions"]))
        if name == "reshape":
            if p.get("dimensions") not in (None, ()):
                raise NotImplementedError("reshape with dimensions")
            return np.reshape(ins[0], tuple(p["new_sizes"])).copy()
        if name == "broadcast_in_dim":
            shape = tuple(p["shape"])
            mid = [1] * len(shape)
            for i, d in enumerate(p["broadcast_dimensions"]):
                mid[d] = ins[0].shape[i]
            return np.broadcast_to(np.reshape(ins[0], mid), shape).copy()
        if name == "concatenate":
            return self._same_kind(np.concatenate, ins, axis=p["dimension"])
        if name == "stack":
            return self._same_kind(np.stack, ins, axis=p["axis"])
        if name == "split":
            cuts = np.cumsum(p["sizes"])[:-1]
            return [a.copy() for a in np.split(ins[0], cuts, axis=p["axis"])]
        if name == "transpose":
            return np.transpose(ins[0], tuple(p["permutation"])).copy()
        if name == "rev":
            return np.flip(ins[0], axis=tuple(p["dimensions"])).copy()
        if name == "iota":
            shape, dim = tuple(p["shape"]), p["dimension"]
            ramp = np.arange(shape[dim]).reshape([-1 if i == dim else 1 for i in range(len(shape))])
            return np.broadcast_to(ramp, shape).copy()
        if name == "pad":
            return self._pad(ins[0], ins[1], p["padding_config"])
        if name == "dot_general":
            return self._dot_general(ins[0], ins[1], p["dimension_numbers"])
        if name in ("reduce_sum", "reduce_max", "reduce_min", "reduce_prod", "reduce_and",
                    "reduce_or"):
            return self._reduce(name, ins[0], tuple(p["axes"]))
        if name in ("argmax", "argmin"):
            return self._argminmax(name, ins[0], tuple(p["axes"]))
        if name == "cumsum":
            return self._cumsum(ins[0], p["axis"], p.get("reverse", False))
        if name == "gather":
            return self._gather(ins[0], ins[1], p)
        if name.startswith("scatter"):
            return self._scatter(name, ins[0], ins[1], ins[2], p)
        if name == "dynamic_slice":
            return self._dynamic_slice(ins[0], ins[1:], p["slice_sizes"])
        if name == "dynamic_update_slice":
            return self._dynamic_update_slice(ins[0], ins[1], ins[2:])
        raise NotImplementedError(
            f"jaxpr_to_sympy: primitive {name!r} is not supported (params: {sorted(p)})"
        )

    # -- branches ------------------------------------------------------------
    def _abs(self, a: El) -> El:
        if a.val == 0 and a.sym is not None:
            self.ties.append(f"abs at 0: {a.sym}")
        if a.val < 0:
            return _neg(a)
        return a

    def _minmax(self, name: str, a: El, b: El) -> El:
        if a.val == b.val:
            if a.sym is not None or b.sym is not None:
                self.ties.append(f"{name} tie at {mpmath.nstr(a.val, 8)}")
                # the convention of jax's derivative rule at ties: the mean
                return _mul(_add(a, b), _const(0.5))
            return a
        first = (a.val > b.val) if name == "max" else (a.val < b.val)
        return a if first else b

    def _rem(self, a: El, b: El) -> El:
        q = mpmath.mpf(int(a.val / b.val))  # truncation toward zero, as C fmod
        return _sub(a, _mul(b, El(None, q)))

    def _note_near_ties(self, name, ins):
        flat = np.broadcast_arrays(*[np.asarray(v, dtype=object) for v in ins])
        for a, b in zip(flat[0].reshape(-1), flat[1].reshape(-1), strict=True):
            if not isinstance(a, El) or not isinstance(b, El):
                continue
            if a.sym is None and b.sym is None:
                continue
            if not (mpmath.isfinite(a.val) and mpmath.isfinite(b.val)):
                continue
            scale = max(abs(a.val), abs(b.val))
            if a.val != b.val and scale > 0 and abs(a.val - b.val) <= mpmath.mpf(1e-12) * scale:
                self.ties.append(f"{name}: near tie {mpmath.nstr(a.val, 20)} "
                                 f"vs {mpmath.nstr(b.val, 20)}")

    def _select_n(self, pred, cases):
        which = np.asarray(_values(pred)).astype(np.int64)
        if any(c.dtype == object for c in cases):
            cases = [c if c.dtype == object else _from_array(c.astype(np.float64)) for c in cases]
            arrays = np.broadcast_arrays(which, *cases)
            which, cases = arrays[0], arrays[1:]
            out = _obj(which.shape)
            for idx in np.ndindex(which.shape):
                out[idx] = cases[int(which[idx])][idx]
            return out
        return np.choose(which, np.broadcast_arrays(*cases))

    def _convert(self, a, new_dtype):
        if _is_float(new_dtype):
            if a.dtype == object:
                return a.copy()
            return _emap(lambda v: El(None, mpmath.mpf(int(v))), a)
        if a.dtype == object:
            if np.dtype(new_dtype) == np.bool_:
                return _emap(lambda e: bool(e.val != 0), a).astype(bool)
            return _emap(lambda e: int(e.val), a).astype(np.dtype(new_dtype))
        return a.astype(np.dtype(new_dtype))

    def _while(self, p, ins):
        cn, bn = p["cond_nconsts"], p["body_nconsts"]
        cconsts, bconsts, carry = ins[:cn], ins[cn:cn + bn], list(ins[cn + bn:])
        for _ in range(1_000_000):
            (go,) = self.run(p["cond_jaxpr"], [], list(cconsts) + carry)
            if not bool(np.asarray(go).reshape(())):
                return carry
            carry = self.run(p["body_jaxpr"], [], list(bconsts) + carry)
        raise RuntimeError("while loop did not terminate in 1e6 iterations")

    def _scan(self, p, ins):
        nc, ncarry, length = p["num_consts"], p["num_carry"], p["length"]
        consts, carry, xs = ins[:nc], list(ins[nc:nc + ncarry]), ins[nc + ncarry:]
        ys_steps = []
        steps = range(length - 1, -1, -1) if p.get("reverse") else range(length)
        for t in steps:
            out = self.run(p["jaxpr"], [], list(consts) + carry + [x[t] for x in xs])
            carry, y = list(out[:ncarry]), out[ncarry:]
            ys_steps.append((t, y))
        ys_steps.sort(key=lambda ty: ty[0])
        n_ys = len(p["jaxpr"].out_avals) - ncarry
        ys = []
        for k in range(n_ys):
            parts = [np.asarray(y[k])[None] for _, y in ys_steps]
            ys.append(self._same_kind(np.concatenate, parts, axis=0) if parts else np.empty((0,)))
        return carry + ys

    # -- structure helpers -----------------------------------------------------
    @staticmethod
    def _same_kind(fn, arrays, **kw):
        if any(np.asarray(a).dtype == object for a in arrays):
            arrays = [a if a.dtype == object else _from_array(a.astype(np.float64))
                      for a in map(np.asarray, arrays)]
        return fn(arrays, **kw)

    def _pad(self, a, value, config):
        """lax.pad: low/high edge padding (negative crops) and interior padding."""
        fill = np.asarray(value).reshape(())[()]

        def filled(shape):
            out = np.empty(shape, dtype=a.dtype)
            out.fill(fill)
            return out

        core = filled([n + max(n - 1, 0) * interior
                       for n, (_, _, interior) in zip(a.shape, config, strict=True)])
        core[tuple(slice(None, None, interior + 1) for (_, _, interior) in config)] = a
        for axis, (lo, hi, _) in enumerate(config):
            n = core.shape[axis]
            core = np.take(core, range(max(-lo, 0), n - max(-hi, 0)), axis=axis)
            parts = []
            for width in (lo, None, hi):
                if width is None:
                    parts.append(core)
                elif width > 0:
                    shape = list(core.shape)
                    shape[axis] = width
                    parts.append(filled(shape))
            core = np.concatenate(parts, axis=axis) if len(parts) > 1 else core
        return core.copy()

    def _dot_general(self, lhs, rhs, dims):
        (lc, rc), (lb, rb) = dims
        lf = [d for d in range(lhs.ndim) if d not in lc and d not in lb]
        rf = [d for d in range(rhs.ndim) if d not in rc and d not in rb]
        L = np.transpose(lhs, list(lb) + lf + list(lc))
        R = np.transpose(rhs, list(rb) + list(rc) + rf)
        bshape = [lhs.shape[d] for d in lb]
        lfs = [lhs.shape[d] for d in lf]
        rfs = [rhs.shape[d] for d in rf]
        k = int(np.prod([lhs.shape[d] for d in lc], dtype=np.int64))
        B = int(np.prod(bshape, dtype=np.int64))
        nl, nr = int(np.prod(lfs, dtype=np.int64)), int(np.prod(rfs, dtype=np.int64))
        L = L.reshape(B, nl, k)
        R = R.reshape(B, k, nr)
        if lhs.dtype != object and rhs.dtype != object:
            return np.einsum("bik,bkj->bij", L, R).reshape(bshape + lfs + rfs)
        if lhs.dtype != object:
            L = _from_array(L.astype(np.float64))
        if rhs.dtype != object:
            R = _from_array(R.astype(np.float64))
        out = _obj((B, nl, nr))
        for b in range(B):
            for i in range(nl):
                for j in range(nr):
                    acc = _const(0)
                    for t in range(k):
                        acc = _add(acc, _mul(L[b, i, t], R[b, t, j]))
                    out[b, i, j] = acc
        return out.reshape(bshape + lfs + rfs)

    def _reduce(self, name, a, axes):
        keep = [d for d in range(a.ndim) if d not in axes]
        moved = np.transpose(a, keep + list(axes))
        outer = moved.shape[: len(keep)]
        flat = moved.reshape(outer + (-1,))
        if a.dtype != object:
            fn = {"reduce_sum": np.sum, "reduce_max": np.max, "reduce_min": np.min,
                  "reduce_prod": np.prod, "reduce_and": np.all, "reduce_or": np.any}[name]
            return np.asarray(fn(flat, axis=-1)).astype(a.dtype)
        out = _obj(outer)
        for idx in np.ndindex(outer):
            items = list(flat[idx])
            if name == "reduce_sum":
                acc = _const(0)
                for e in items:
                    acc = _add(acc, e)
            elif name == "reduce_prod":
                acc = _const(1)
                for e in items:
                    acc = _mul(acc, e)
            else:
                mm = "max" if name == "reduce_max" else "min"
                acc = items[0]
                for e in items[1:]:
                    acc = self._minmax(mm, acc, e)
            out[idx] = acc
        return out

    def _argminmax(self, name, a, axes):
        (axis,) = axes
        vals = _values(a)
        moved = np.moveaxis(vals, axis, -1)
        out = np.empty(moved.shape[:-1], dtype=np.int64)
        for idx in np.ndindex(out.shape):
            row = list(moved[idx])
            best = 0
            for i, v in enumerate(row):
                if (name == "argmax" and v > row[best]) or (name == "argmin" and v < row[best]):
                    best = i
            out[idx] = best
        return out

    def _cumsum(self, a, axis, reverse):
        if a.dtype != object:
            b = np.flip(a, axis) if reverse else a
            c = np.cumsum(b, axis=axis)
            return np.flip(c, axis) if reverse else c
        b = np.moveaxis(np.flip(a, axis) if reverse else a, axis, -1).copy()
        for idx in np.ndindex(b.shape[:-1]):
            for i in range(1, b.shape[-1]):
                b[idx + (i,)] = _add(b[idx + (i - 1,)], b[idx + (i,)])
        c = np.moveaxis(b, -1, axis)
        return np.flip(c, axis).copy() if reverse else c.copy()

    def _dynamic_slice(self, a, starts, sizes):
        st = [int(np.asarray(s).reshape(())) for s in starts]
        st = [min(max(s, 0), n - k) for s, n, k in zip(st, a.shape, sizes, strict=True)]
        return a[tuple(slice(s, s + k) for s, k in zip(st, sizes, strict=True))].copy()

    def _dynamic_update_slice(self, a, upd, starts):
        st = [int(np.asarray(s).reshape(())) for s in starts]
        st = [min(max(s, 0), n - k) for s, n, k in zip(st, a.shape, upd.shape, strict=True)]
        if a.dtype == object and upd.dtype != object:
            upd = _from_array(upd.astype(np.float64))
        out = a.copy()
        out[tuple(slice(s, s + k) for s, k in zip(st, upd.shape, strict=True))] = upd
        return out

    @staticmethod
    def _mode_name(mode) -> str:
        return getattr(mode, "name", str(mode)).upper()

    def _gather(self, operand, indices, p):
        dn = p["dimension_numbers"]
        if getattr(dn, "operand_batching_dims", ()) or getattr(
            dn, "start_indices_batching_dims", ()
        ):
            raise NotImplementedError("gather with batching dims")
        offset_dims = tuple(dn.offset_dims)
        collapsed = tuple(dn.collapsed_slice_dims)
        start_map = tuple(dn.start_index_map)
        slice_sizes = tuple(p["slice_sizes"])
        mode = self._mode_name(p["mode"])
        indices = np.asarray(indices)
        batch_shape = indices.shape[:-1]
        window_operand_dims = [d for d in range(operand.ndim) if d not in collapsed]
        window_shape = [slice_sizes[d] for d in window_operand_dims]
        out_rank = len(batch_shape) + len(offset_dims)
        out_shape = [0] * out_rank
        batch_dims_out = [d for d in range(out_rank) if d not in offset_dims]
        for d, n in zip(batch_dims_out, batch_shape, strict=True):
            out_shape[d] = n
        for d, n in zip(offset_dims, window_shape, strict=True):
            out_shape[d] = n
        is_obj = operand.dtype == object
        out = _obj(out_shape) if is_obj else np.empty(out_shape, dtype=operand.dtype)
        fill = p.get("fill_value")
        for oidx in np.ndindex(*out_shape):
            bidx = tuple(oidx[d] for d in batch_dims_out)
            widx = [oidx[d] for d in offset_dims]
            start = [0] * operand.ndim
            for k, d in enumerate(start_map):
                start[d] = int(indices[bidx + (k,)])
            oob = any(s < 0 or s + slice_sizes[d] > operand.shape[d] for d, s in enumerate(start))
            if oob and mode == "FILL_OR_DROP":
                out[oidx] = _gather_fill(operand.dtype, fill)
                continue
            start = [min(max(s, 0), operand.shape[d] - slice_sizes[d]) for d, s in enumerate(start)]
            full = list(start)
            for k, d in enumerate(window_operand_dims):
                full[d] += widx[k]
            out[oidx] = operand[tuple(full)]
        return out

    def _scatter(self, name, operand, indices, updates, p):
        dn = p["dimension_numbers"]
        if getattr(dn, "operand_batching_dims", ()) or getattr(
            dn, "scatter_indices_batching_dims", ()
        ):
            raise NotImplementedError("scatter with batching dims")
        kind = name.replace("_", "-").removeprefix("scatter").removeprefix("-") or "set"
        if kind not in ("set", "add", "sub", "mul", "min", "max"):
            raise NotImplementedError(f"jaxpr_to_sympy: primitive {name!r} is not supported")
        update_window_dims = tuple(dn.update_window_dims)
        inserted = tuple(dn.inserted_window_dims)
        to_operand = tuple(dn.scatter_dims_to_operand_dims)
        mode = self._mode_name(p["mode"])
        indices = np.asarray(indices)
        is_obj = operand.dtype == object
        if is_obj and updates.dtype != object:
            updates = _from_array(updates.astype(np.float64))
        out = operand.copy()
        window_operand_dims = [d for d in range(operand.ndim) if d not in inserted]
        scatter_dims = [d for d in range(updates.ndim) if d not in update_window_dims]
        window_sizes = [updates.shape[d] for d in update_window_dims]
        for uidx in np.ndindex(*updates.shape):
            sidx = tuple(uidx[d] for d in scatter_dims)
            widx = [uidx[d] for d in update_window_dims]
            start = [0] * operand.ndim
            for k, d in enumerate(to_operand):
                start[d] = int(indices[sidx + (k,)])
            extent = [1] * operand.ndim
            for k, d in enumerate(window_operand_dims):
                extent[d] = window_sizes[k]
            bounds = list(zip(start, extent, operand.shape, strict=True))
            if any(s < 0 or s + e > n for s, e, n in bounds):
                if mode == "CLIP":
                    start = [min(max(s, 0), n - e) for s, e, n in bounds]
                else:  # FILL_OR_DROP and PROMISE_IN_BOUNDS: out-of-bounds updates are dropped
                    continue
            full = list(start)
            for k, d in enumerate(window_operand_dims):
                full[d] += widx[k]
            full = tuple(full)
            out[full] = self._combine(kind, out[full], updates[uidx], is_obj)
        return out

    def _combine(self, kind, a, b, is_obj):
        if kind == "set":
            return b
        if kind in ("min", "max"):
            if is_obj:
                return self._minmax(kind, a, b)
            return max(a, b) if kind == "max" else min(a, b)
        if is_obj:
            return {"add": _add, "sub": _sub, "mul": _mul}[kind](a, b)
        return {"add": np.add, "sub": np.subtract, "mul": np.multiply}[kind](a, b)


def _gather_fill(dtype, fill):
    """Value of an out-of-bounds gather in "fill" mode (jax's defaults when fill is None)."""
    if np.dtype(dtype).kind == "O":
        return _const(math.nan if fill is None else fill)
    if fill is not None:
        return fill
    if dtype == np.bool_:
        return True
    info = np.iinfo(dtype)
    return info.min if np.issubdtype(dtype, np.signedinteger) else info.max


def _int_div(a, b):
    q = np.abs(a) // np.abs(b)
    return np.where((a < 0) != (b < 0), -q, q)


_INT_OPS: dict[str, Callable] = {
    "add": np.add,
    "sub": np.subtract,
    "mul": np.multiply,
    "div": _int_div,
    "rem": lambda a, b: a - b * _int_div(a, b),
    "neg": np.negative,
    "abs": np.abs,
    "sign": np.sign,
    "max": np.maximum,
    "min": np.minimum,
    "and": lambda a, b: np.bitwise_and(a, b) if a.dtype != bool else np.logical_and(a, b),
    "or": lambda a, b: np.bitwise_or(a, b) if a.dtype != bool else np.logical_or(a, b),
    "xor": lambda a, b: np.bitwise_xor(a, b) if a.dtype != bool else np.logical_xor(a, b),
    "not": lambda a: np.invert(a) if a.dtype != bool else np.logical_not(a),
    "clamp": lambda lo, x, hi: np.clip(x, lo, hi),
    "shift_left": np.left_shift,
    "shift_right_arithmetic": np.right_shift,
}

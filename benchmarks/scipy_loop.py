"""The per-sample scipy loop that the throughput benchmarks compare adlin against.

What an engineer would otherwise write for many parameter samples:
scipy.optimize.root on the residual from the nominal operating point, a
central finite-difference Jacobian of f and q, and the finite generalized
eigenvalues of (A, E) from scipy.linalg.eigvals.  The model's residual and
charge functions are called as jitted JAX functions, compiled before the
clock starts.  Used by `throughput.py` and `monte_carlo_throughput.py`.
"""

from __future__ import annotations

import statistics
import time

import jax
import numpy as np
import scipy.linalg
import scipy.optimize

import adlin


def run_baseline(system, P, inputs=None):
    """Poles of every row of P (full parameter vectors) by the scipy loop.

    **Returns:** (list of sorted finite poles per sample, converged flags,
    seconds for the loop alone).
    """
    u = np.asarray(system.input_vector(inputs))
    f = jax.jit(system.f)
    q = jax.jit(system.q)
    x_nom = np.asarray(adlin.steady_state(system, inputs).x)
    n = system.n
    jax.block_until_ready((f(x_nom, u, np.asarray(P[0])), q(x_nom, np.asarray(P[0]))))

    def fd_jac(fun, x, h_rel=1e-6):
        J = np.empty((n, n))
        for j in range(n):
            h = h_rel * max(1.0, abs(x[j]))
            e = np.zeros(n)
            e[j] = h
            J[:, j] = (np.asarray(fun(x + e)) - np.asarray(fun(x - e))) / (2 * h)
        return J

    out, ok = [], []
    t0 = time.perf_counter()
    for p in P:
        pj = np.asarray(p)
        sol = scipy.optimize.root(lambda x, pj=pj: np.asarray(f(x, u, pj)), x_nom,
                                  method="hybr", tol=1e-12)
        x = sol.x
        A = -fd_jac(lambda x_, pj=pj: f(x_, u, pj), x)
        E = fd_jac(lambda x_, pj=pj: q(x_, pj), x)
        lam = scipy.linalg.eigvals(A, E)
        out.append(np.sort_complex(lam[np.isfinite(lam)]))
        ok.append(sol.success)
    return out, np.asarray(ok), time.perf_counter() - t0


def in_turns(adlin_call, system, P, rounds: int, inputs=None):
    """adlin's warm call and a share of the loop's samples (rows of P), timed in
    turns, `rounds` times: the machine is shared and its speed drifts, so each
    ratio compares two measurements taken back to back.  One untimed call of
    each comes first (both are compiled by then; this settles caches and
    allocations).

    **Returns:** (adlin seconds per call, loop seconds per sample, one value per
    round; the loop's poles and converged flags for all rows of P; adlin's
    last result).
    """
    adlin_call()  # one untimed warm-up call of each side
    run_baseline(system, P[:2], inputs)
    t_adlin, t_loop, ref, ref_ok, result = [], [], [], [], None
    for rows in np.array_split(np.arange(P.shape[0]), rounds):
        t0 = time.perf_counter()
        result = adlin_call()
        t_adlin.append(time.perf_counter() - t0)
        out, ok, seconds = run_baseline(system, P[rows], inputs)
        t_loop.append(seconds / rows.size)
        ref += out
        ref_ok.append(ok)
    return t_adlin, t_loop, ref, np.concatenate(ref_ok), result


def report(n: int, nb: int, t_first: float, warm, loop, adlin_note: str, loop_note: str) -> None:
    """Print adlin's and the loop's times from `scipy_loop.in_turns` and their
    ratio per round (loop seconds per sample x n / adlin seconds per call)."""
    t_warm, t_loop = statistics.median(warm), statistics.median(loop)
    ratios = [lp * n / a for a, lp in zip(warm, loop, strict=True)]
    print(f"adlin, warm       : min/median/max {min(warm):.3f}/{t_warm:.3f}/{max(warm):.3f} s "
          f"= {n / t_warm:,.0f} samples/s median ({t_warm / n * 1e6:.1f} us per sample), "
          f"{adlin_note}; first call {t_first:.2f} s (includes compilation)")
    print(f"scipy loop        : {t_loop * 1e3:.2f} ms per sample median "
          f"({min(loop) * 1e3:.2f}-{max(loop) * 1e3:.2f} over the rounds) = "
          f"{1 / t_loop:,.0f} samples/s, on {nb} of the samples, {loop_note}")
    print(f"speed-up, warm adlin vs scipy loop : {statistics.median(ratios):8.1f}x median of "
          f"{len(ratios)} rounds ({min(ratios):.1f}x to {max(ratios):.1f}x), each round one adlin "
          "call and then its share of the loop   (target >= 300x)")
    print(f"speed-up, adlin first call         : {t_loop * n / t_first:8.1f}x")


def pole_agreement(poles, ok, ref, ref_ok) -> tuple[float, float, int]:
    """Largest relative pole difference, overall and below 1e8 rad/s, where both converged
    (each adlin pole matched to one loop pole by a minimum-cost assignment)."""
    err, slow_err, compared = 0.0, 0.0, 0
    for k in range(len(ref)):
        if ok[k] and ref_ok[k] and len(ref[k]) == poles.shape[1]:
            rel = np.abs(poles[k][:, None] - ref[k][None, :]) / np.abs(ref[k][None, :])
            i, j = scipy.optimize.linear_sum_assignment(rel)
            err = max(err, float(rel[i, j].max()))
            slow = np.abs(ref[k][j]) < 1e8
            if slow.any():
                slow_err = max(slow_err, float(rel[i, j][slow].max()))
            compared += 1
    return err, slow_err, compared

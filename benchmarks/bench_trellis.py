"""Speed of the forward recursion (trellis information rates) against a plain NumPy loop, same process.

Work is counted in branch updates: one (state, input) branch evaluated for one received slot, so a run of n slots
over a trellis with S^M states and S inputs costs n * S^M * S updates. Both versions compute the same quantity
(sum_k ln lambda_k of the normalised, scaled forward recursion with Poisson branch likelihoods) on the same
counts: the project's version is one jitted ``lax.scan`` vmapped over independent runs; the baseline is a Python
loop over time vectorised over states and inputs (NumPy, the same scaled linear-domain update), one run at a time.
Compilation is excluded (one warm-up call); both timings are the best of three. A second table shows how the
project's cost grows with emitters, receivers, memory and alphabet size.

Run: ``python benchmarks/bench_trellis.py`` (prints the tables, returns a dict from :func:`run`).
"""

from __future__ import annotations

import time

import jax
import jax.numpy as jnp
import numpy as np

import capacity  # noqa: F401  (float64 switch)
from capacity.information.trellis import branch_means, forward_log_normalisers, poisson_log_branch


def _channel(E, R, L, S, seed=0):
    rng = np.random.default_rng(seed)
    hits = rng.uniform(0.02, 0.3, size=(E, R, L + 1)) * np.exp(-0.5 * np.arange(L + 1))[None, None, :]
    symbols = np.zeros((S, E))
    symbols[1:, :] = rng.integers(1, 6, size=(S - 1, E))
    return hits, np.full(R, 0.2), symbols


def _counts(hits, base, symbols, n, runs, seed=1):
    rng = np.random.default_rng(seed)
    S = symbols.shape[0]
    L = hits.shape[2] - 1
    x = rng.integers(0, S, size=(runs, n + L))
    X = symbols[x]  # (runs, n+L, E)
    mean = base + sum(np.einsum("rne,ej->rnj", X[:, L - l: L - l + n], hits[:, :, l]) for l in range(L + 1))
    return rng.poisson(mean).astype(float)


def numpy_forward(mu, log_trans, log_prior, y):
    """Plain baseline: sum_k ln lambda_k for one run, Python loop over time (y (n, R)).

    Same algorithm as the project's default: normalised forward vector in the linear domain, branch weights
    scaled by exp(-max log-weight) each step.
    """
    N, S = log_trans.shape
    log_mu = np.log(np.maximum(mu.reshape(N * S, -1), 1e-300))
    mu_sum = mu.reshape(N * S, -1).sum(axis=1)
    alpha = np.exp(log_prior)
    total = 0.0
    for yk in y:
        lw = log_trans + (log_mu @ yk - mu_sum).reshape(N, S)
        m = np.max(np.where(alpha[:, None] > 0, lw, -np.inf))
        w = alpha[:, None] * np.exp(lw - m)
        new = w.sum(keepdims=True).ravel() if N == 1 else w.reshape(S, N // S, S).sum(axis=0).ravel()
        z = new.sum()
        alpha = new / z
        total += m + np.log(z)
    return total


def _jax_forward(mu, log_trans, log_prior):
    N, S = log_trans.shape
    mu_flat = jnp.asarray(mu.reshape(N * S, -1))
    branch = poisson_log_branch(mu_flat, mu_flat.sum(axis=1), N, S)
    lt, lp = jnp.asarray(log_trans), jnp.asarray(log_prior)
    return jax.jit(jax.vmap(lambda y: forward_log_normalisers(branch, lt, lp, y, S).sum()))


def _setup(E, R, L, S):
    hits, base, symbols = _channel(E, R, L, S)
    mu = branch_means(hits, base, symbols, L)
    N = S**L
    return hits, base, symbols, mu, np.full((N, S), -np.log(S)), np.full(N, -L * np.log(S))


def _time_jax(f, y, repeats=3):
    f(y).block_until_ready()  # compile
    best = np.inf
    for _ in range(repeats):
        t = time.perf_counter()
        f(y).block_until_ready()
        best = min(best, time.perf_counter() - t)
    return best


def run(n_jax: int = 20_000, runs: int = 8, n_numpy: int = 2_000) -> dict:
    """Branch updates per second, project vs baseline (E=1, R=1, S=2, L=6: 64 states), and a scaling table."""
    E, R, L, S = 1, 1, 6, 2
    hits, base, symbols, mu, lt, lp = _setup(E, R, L, S)
    y = _counts(hits, base, symbols, n_jax, runs)
    f = _jax_forward(mu, lt, lp)
    t_jax = _time_jax(f, jnp.asarray(y))
    t_np = np.inf
    for _ in range(3):  # best of three, as for the JAX timing
        t = time.perf_counter()
        ref = numpy_forward(mu, lt, lp, y[0, :n_numpy])
        t_np = min(t_np, time.perf_counter() - t)
    agree = float(abs(ref - float(f(jnp.asarray(y[:1, :n_numpy]))[0])))
    upd = S**L * S
    jax_rate = upd * n_jax * runs / t_jax
    np_rate = upd * n_numpy / t_np
    out = {"config": {"emitters": E, "receivers": R, "memory": L, "symbols": S, "states": S**L,
                      "n_jax": n_jax, "runs": runs, "n_numpy": n_numpy},
           "jax_branch_updates_per_s": jax_rate, "numpy_branch_updates_per_s": np_rate,
           "speedup": jax_rate / np_rate, "abs_difference_sum_log_lambda": agree, "scaling": []}
    print(f"forward recursion, {S**L} states x {S} inputs: JAX {jax_rate:.3g} branch updates/s, NumPy loop "
          f"{np_rate:.3g}/s, ratio {jax_rate / np_rate:.1f}x (|difference| of sum ln lambda {agree:.1e})")
    print(f"{'E':>3} {'R':>3} {'L':>3} {'S':>3} {'states':>7} {'s/run (5000 slots)':>20} {'branch upd/s':>14}")
    for (E2, R2, L2, S2) in [(1, 1, 2, 2), (1, 1, 6, 2), (1, 1, 10, 2), (1, 4, 6, 2), (2, 2, 4, 3), (3, 3, 3, 4),
                             (1, 1, 3, 8)]:
        hits2, base2, sym2, mu2, lt2, lp2 = _setup(E2, R2, L2, S2)
        y2 = _counts(hits2, base2, sym2, 5000, 4)
        t2 = _time_jax(_jax_forward(mu2, lt2, lp2), jnp.asarray(y2), repeats=2) / 4
        rate2 = S2**L2 * S2 * 5000 / t2
        out["scaling"].append({"emitters": E2, "receivers": R2, "memory": L2, "symbols": S2, "states": S2**L2,
                               "seconds_per_run_5000": t2, "branch_updates_per_s": rate2})
        print(f"{E2:>3} {R2:>3} {L2:>3} {S2:>3} {S2**L2:>7} {t2:>20.4f} {rate2:>14.3g}")
    return out


if __name__ == "__main__":
    run()

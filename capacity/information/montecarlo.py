"""Monte Carlo mutual information of a memoryless Poisson channel (alphabets or receiver counts too large for
exact output sums).

For inputs ``x ~ p`` and independent counts ``y_j ~ Poisson(means[x, j])`` at the R receivers,

    I(X;Y) = E[ ln W(y|x) - ln sum_x' p(x') W(y|x') ],

estimated by the sample mean over i.i.d. draws ``(x, y)``; the standard error is the sample standard deviation
over sqrt(n) (central limit theorem), with a normal 95 % interval. The ``-ln y!`` terms cancel exactly and are
dropped. Standard practice (e.g. Cover & Thomas, Elements of Information Theory, 2nd ed., Sec. 2.3 for the
identity; plain Monte Carlo for the estimate).
"""

from __future__ import annotations

import jax
import numpy as np
from scipy.special import logsumexp, xlogy

from capacity import _jax  # noqa: F401  (float64)
from capacity.errors import InputError
from capacity.information.result import RateResult
from capacity.information.trellis import poisson_counts

LN2 = float(np.log(2.0))


def _densities(key, means, p, n):
    """Per-sample information densities (nats), shape (n,): x by inverse CDF, y by jax.random.poisson."""
    kx, ky = jax.random.split(key)
    u = np.asarray(jax.random.uniform(kx, (n,)))
    x = np.minimum(np.searchsorted(np.cumsum(p), u, side="right"), p.size - 1)
    y = np.asarray(poisson_counts(ky, means[x]))
    with np.errstate(divide="ignore"):
        log_p = np.log(p)
    out = np.empty(n)
    chunk = max(1, 2_000_000 // means.size)
    for a in range(0, n, chunk):
        yy, xx = y[a:a + chunk], x[a:a + chunk]
        # ln W(y | x') up to -ln y!, for every candidate x': (chunk, S)
        ll = xlogy(yy[:, None, :], means[None, :, :]).sum(axis=2) - means.sum(axis=1)[None, :]
        out[a:a + chunk] = ll[np.arange(len(xx)), xx] - logsumexp(ll + log_p[None, :], axis=1)
    return out


def mc_mutual_information(means, input_law, *, n_samples: int = 100_000, seed: int = 0) -> RateResult:
    """Monte Carlo I(X;Y) in bits per channel use for a memoryless multi-receiver Poisson channel.

    Parameters
    ----------
    means : (S, R) mean counts of each receiver for each input symbol (background included), >= 0.
    input_law : (S,) input probabilities.
    n_samples : number of (x, y) draws.
    seed : seed of the jax.random key.

    Returns a RateResult with the estimate, its standard error and a 95 % normal interval in the message.
    """
    mu = np.asarray(means, dtype=float)
    if mu.ndim == 1:
        mu = mu[:, None]
    if mu.ndim != 2 or mu.shape[0] < 1 or not np.all(np.isfinite(mu)) or np.any(mu < 0):
        raise InputError("means", np.shape(means), "must be an (S, R) array of finite non-negative mean counts",
                         "give one row of receiver means per input symbol")
    p = np.asarray(input_law, dtype=float)
    if p.shape != (mu.shape[0],) or np.any(p < 0) or not np.isfinite(p).all() or abs(p.sum() - 1.0) > 1e-9:
        raise InputError("input_law", input_law, f"must be a probability vector of length {mu.shape[0]}",
                         "give non-negative probabilities that sum to 1")
    if int(n_samples) < 2:
        raise InputError("n_samples", n_samples, "need at least 2 samples", "use e.g. n_samples=100000")
    S = mu.shape[0]
    d = _densities(jax.random.PRNGKey(int(seed)), mu, p / p.sum(), int(n_samples)) / LN2
    n = d.size
    rate = float(d.mean())
    se = float(d.std(ddof=1) / np.sqrt(n))
    msg = (f"{n} samples, {S} inputs, {mu.shape[1]} receivers; 95% interval "
           f"[{rate - 1.96 * se:.6g}, {rate + 1.96 * se:.6g}] bits (normal approximation)")
    return RateResult(rate, se, "Monte Carlo", n, int(seed), msg)

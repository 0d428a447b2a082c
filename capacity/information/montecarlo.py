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

from functools import partial

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax
from jax.scipy.special import logsumexp, xlogy

from capacity.errors import InputError
from capacity.information.result import RateResult

LN2 = float(np.log(2.0))


@partial(jax.jit, static_argnames=("n_chunks", "chunk"))
def _samples(key, means, log_p, *, n_chunks: int, chunk: int):
    """Per-sample information densities (nats), shape (n_chunks * chunk,)."""

    def one_chunk(k):
        kx, ky = jax.random.split(k)
        x = jax.random.categorical(kx, log_p, shape=(chunk,))
        mu = means[x]  # (chunk, R)
        y = jax.random.poisson(ky, mu, shape=mu.shape).astype(jnp.float64)
        # ln W(y | x') up to -ln y!, for every candidate x': (chunk, S)
        ll = xlogy(y[:, None, :], means[None, :, :]).sum(axis=2) - means.sum(axis=1)[None, :]
        own = jnp.take_along_axis(ll, x[:, None], axis=1)[:, 0]
        return own - logsumexp(ll + log_p[None, :], axis=1)

    return lax.map(one_chunk, jax.random.split(key, n_chunks)).reshape(-1)


def mc_mutual_information(means, input_law, *, n_samples: int = 100_000, seed: int = 0) -> RateResult:
    """Monte Carlo I(X;Y) in bits per channel use for a memoryless multi-receiver Poisson channel.

    Parameters
    ----------
    means : (S, R) mean counts of each receiver for each input symbol (background included), >= 0.
    input_law : (S,) input probabilities.
    n_samples : number of (x, y) draws (rounded up to whole chunks).
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
    chunk = int(max(1, min(int(n_samples), 2_000_000 // max(S * mu.shape[1], 1))))
    n_chunks = -(-int(n_samples) // chunk)
    with np.errstate(divide="ignore"):
        log_p = np.log(p / p.sum())
    d = np.asarray(_samples(jax.random.PRNGKey(int(seed)), jnp.asarray(mu), jnp.asarray(log_p),
                            n_chunks=n_chunks, chunk=chunk)) / LN2
    n = d.size
    rate = float(d.mean())
    se = float(d.std(ddof=1) / np.sqrt(n))
    msg = (f"{n} samples, {S} inputs, {mu.shape[1]} receivers; 95% interval "
           f"[{rate - 1.96 * se:.6g}, {rate + 1.96 * se:.6g}] bits (normal approximation)")
    return RateResult(rate, se, "Monte Carlo", n, int(seed), msg)

"""Single-letter bounds on the i.i.d. information rate of the Poisson ISI channel.

For i.i.d. inputs the chain rule gives (Shamai, Ozarow, Wyner, "Information rates for a discrete-time Gaussian
channel with intersymbol interference and stationary inputs", IEEE Trans. IT 37(6), 1991, for the Gaussian
analogue; the argument only uses the chain rule and independence of the inputs):

    I_sbs = I(X_k; Y_k)                              ISI treated as noise (symbol by symbol)
          <= I_dfe = I(X_k; Y_k | X_{k-1..k-L})         past symbols known (decision-feedback genie)
          <= I_iid = lim I(X^n; Y^n) / n
          <= I_mf  = I(X_k; Y_k..Y_{k+L} | X_j, j != k)  matched-filter genie (every other symbol known).

Each is a mutual information of a memoryless channel with side information ``g`` (nothing / the past / all other
symbols): ``sum_g w_g sum_s p_s sum_y W_g(y|s) ln(W_g(y|s) / sum_s' p_s' W_g(y|s'))``. It is summed exactly over a
truncated output grid when ``groups x inputs x outputs <= exact_limit`` (the neglected output mass is reported),
and estimated by Monte Carlo with a standard error otherwise. When the past has too many states for the ISI-as-
noise mixture, the mixture keeps the first L' lags and the rest at their mean and is evaluated on outputs of the
true channel: an auxiliary-channel lower bound on I_sbs (Arnold et al., IEEE Trans. IT 52(8), 2006), which keeps
the ordering.
"""

from __future__ import annotations

import itertools

import numpy as np
from scipy.special import logsumexp, xlogy
from scipy.stats import poisson

from capacity.errors import InputError
from capacity.information.result import RateResult
from capacity.information.trellis import branch_means, check_channel, check_law, state_digits

LN2 = float(np.log(2.0))
TAIL = 1e-14  # per output coordinate, Poisson mass left beyond the grid at the largest mean


def _grid(mu_max: np.ndarray) -> np.ndarray:
    """All count vectors with y_d <= isf(TAIL, mu_max_d): shape (Ny, D)."""
    tops = [int(poisson.isf(TAIL, m)) + 1 if m > 0 else 0 for m in mu_max]
    return np.array(list(itertools.product(*[range(t + 1) for t in tops])), dtype=float).reshape(-1, len(tops))


def _log_pmf(mu: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """ln prod_d Poisson(grid[y, d]; mu[b, d]) for every branch b and grid point y: (B, Ny)."""
    out = np.zeros((mu.shape[0], grid.shape[0]))
    for d in range(mu.shape[1]):
        out += poisson.logpmf(grid[None, :, d], mu[:, d][:, None])
    return out


def _exact(log_w: np.ndarray, weights: np.ndarray, p: np.ndarray) -> tuple[float, float]:
    """sum_g w_g sum_s p_s sum_y W log(W / P_g) in bits, and the neglected mass; log_w (G, S, Ny)."""
    with np.errstate(divide="ignore"):
        log_p = np.log(p)
    log_out = logsumexp(log_w + log_p[None, :, None], axis=1)  # (G, Ny)
    w = np.exp(log_w)
    with np.errstate(invalid="ignore"):
        dens = np.where(w > 0, log_w - log_out[:, None, :], 0.0)
    info = np.einsum("g,s,gsy->", weights, p, w * dens)
    mass = float(np.einsum("g,gy->", weights, np.exp(log_out)))
    return float(info) / LN2, max(0.0, 1.0 - mass)


def _ll(y: np.ndarray, mu: np.ndarray) -> np.ndarray:
    """Poisson log-likelihood without -ln y!, summed over the last axis; y broadcast against mu."""
    return (xlogy(y, mu) - mu).sum(axis=-1)


def _mc_result(d: np.ndarray, seed: int, method: str, msg: str) -> RateResult:
    d = d / LN2
    se = float(d.std(ddof=1) / np.sqrt(d.size))
    return RateResult(float(d.mean()), se, method, int(d.size), seed,
                      f"{msg}; Monte Carlo over {d.size} samples, standard error = sample std / sqrt(n)")


def _stratified(means_of, p, n, rng, chunk):
    """Samples G_c = sum_s p_s [ln W(y_cs|ctx_c, s) - ln sum_s' p_s' W(y_cs|ctx_c, s')] over contexts c.

    ``means_of(c)`` draws c contexts and returns their means (c, S, D) under every hypothesised symbol. Each
    context gets one output draw per symbol s (y_cs ~ W(.|ctx_c, s)), weighted by p_s: stratified sampling over
    the current symbol, unbiased for sum_s p_s E[...] = the mutual information, with a much smaller variance than
    drawing s ~ p when some symbols are rare (common practice, e.g. Owen, "Monte Carlo theory, methods and
    examples", ch. 8 on stratification). ceil(n / S) contexts keep the work of n single draws; symbols with
    p_s = 0 are skipped."""
    S = p.size
    used = np.flatnonzero(p > 0)
    with np.errstate(divide="ignore"):
        lp = np.log(p)
    n_ctx = max(2, -(-n // S))
    out = []
    for start in range(0, n_ctx, chunk):
        c = min(chunk, n_ctx - start)
        mu = means_of(c)  # (c, S, D)
        y = rng.poisson(mu[:, used]).astype(float)  # (c, U, D): one draw per context and used symbol
        ll = _ll(y[:, :, None, :], mu[:, None, :, :])  # (c, U, S): likelihood of each draw under each symbol
        own = ll[:, np.arange(used.size), used]
        g = own - logsumexp(ll + lp[None, None, :], axis=2)
        out.append(g @ p[used])
    return np.concatenate(out)


def _dfe_mc(per_lag, base, p, n, rng, chunk):
    """Samples for I_dfe: pasts of L symbols i.i.d. from p, stratified over the current symbol."""
    L, S = per_lag.shape[0] - 1, p.size

    def means_of(c):
        past = rng.choice(S, size=(c, L), p=p)
        isi = base[None, :] + sum((per_lag[lag][past[:, lag - 1]] for lag in range(1, L + 1)),
                                  np.zeros((c, base.size)))
        return isi[:, None, :] + per_lag[0][None, :, :]  # (c, S, R)

    return _stratified(means_of, p, n, rng, chunk)


def _mf_means(per_lag, base, ctx, S):
    """Means (c, S, L+1, R) of slots k..k+L given the other symbols ctx (c, 2L) = (x_{k-L..k-1}, x_{k+1..k+L}).

    Slot k+s receives lag l from the symbol at k+s-l. The known symbols' part is one gather per lag over the whole
    sequence (the current position maps to a zero row), the current symbol's part one broadcast."""
    L = per_lag.shape[0] - 1
    c = ctx.shape[0]
    R = base.size
    padded = np.concatenate([per_lag, np.zeros((L + 1, 1, R))], axis=1)  # symbol index S: "not a known symbol"
    seq = np.concatenate([ctx[:, :L], np.full((c, 1), S, dtype=ctx.dtype), ctx[:, L:]], axis=1)  # (c, 2L+1)
    known = np.zeros((c, L + 1, R))
    for lag in range(L + 1):  # slots 0..L take lag `lag` from sequence positions L-lag .. 2L-lag
        known += padded[lag][seq[:, L - lag: 2 * L - lag + 1]]
    own = np.transpose(per_lag, (1, 0, 2))  # (S, L+1, R): symbol x at k gives lag s to slot k+s
    return base[None, None, None, :] + known[:, None, :, :] + own[None, :, :, :]


def isi_bounds(hits, background, symbols, input_law, *, interference=None, n_samples: int = 20_000,
               seed: int = 0, exact_limit: int = 200_000, max_states: int = 1024) -> dict[str, RateResult]:
    """I_sbs <= I_dfe <= I_iid <= I_mf (bits/symbol) for an i.i.d. input law.

    Parameters
    ----------
    hits : (E, R, L+1) hit probabilities; background : (R,) mean counts; symbols : (S, E) molecules;
    input_law : (S,) i.i.d. symbol law; interference : optional (R,) extra constant mean counts.
    n_samples : Monte Carlo samples where a bound cannot be enumerated; seed : NumPy generator seed.
    exact_limit : largest ``groups x inputs x output grid points`` summed exactly.
    max_states : largest number of past states in the ISI-as-noise mixture (beyond it: auxiliary lower bound).

    Returns ``{"sbs": ..., "dfe": ..., "mf": ...}``; each ``method`` says "exact" or "Monte Carlo".
    """
    h, base, sym = check_channel(hits, background, symbols, interference)
    S = sym.shape[0]
    law, m = check_law(input_law, S)
    if m != 0:
        raise InputError("input_law", law.shape, "the single-letter bounds are for i.i.d. inputs",
                         "pass a law of shape (S,)")
    if int(n_samples) < 2:
        raise InputError("n_samples", n_samples, "need at least 2 samples", "use e.g. n_samples=20000")
    p = law[0]
    L = h.shape[2] - 1
    R = base.size
    n = int(n_samples)
    per_lag = np.einsum("se,erl->lsr", sym, h)  # (L+1, S, R)
    rng = np.random.default_rng(int(seed))
    out: dict[str, RateResult] = {}
    # largest mean per receiver over all (past, current) symbol combinations, without enumerating them
    grid = _grid(base + per_lag.max(axis=1).sum(axis=0))
    small = S ** (L + 1) * grid.shape[0] <= exact_limit  # Python integers: no overflow for long memories
    if small:
        digits = state_digits(S, L)
        pi = np.prod(p[digits], axis=1) if L else np.ones(1)
        mu = branch_means(h, base, sym, L)  # (S^L, S, R)
    tag = f"{grid.shape[0]} output points per slot"

    # --- sbs: ISI treated as noise --------------------------------------------------------------------
    if small:
        lw = _log_pmf(mu.reshape(-1, R), grid).reshape(S**L, S, -1)
        with np.errstate(divide="ignore"):
            mix = logsumexp(lw + np.log(pi)[:, None, None], axis=0)[None]  # (1, S, Ny)
        val, lost = _exact(mix, np.ones(1), p)
        out["sbs"] = RateResult(val, 0.0, "exact", 0, None, f"{tag}; neglected output mass {lost:.1e}")
    else:
        kept = 0
        while kept < L and S ** (kept + 1) <= max_states:
            kept += 1
        tail = np.einsum("s,sr->r", p, per_lag[kept + 1:].sum(axis=0)) if kept < L else np.zeros(R)
        mu_aux = branch_means(h[:, :, : kept + 1], base + tail, sym, kept)  # (S^kept, S, R)
        pi_aux = np.prod(p[state_digits(S, kept)], axis=1) if kept else np.ones(1)
        with np.errstate(divide="ignore"):
            lpi, lp = np.log(pi_aux), np.log(p)
        chunk = max(1, 2_000_000 // (mu_aux.size))
        d = []
        for start in range(0, n, chunk):
            c = min(chunk, n - start)
            past = rng.choice(S, size=(c, L), p=p)
            s = rng.choice(S, size=c, p=p)
            mu_true = base[None, :] + per_lag[0][s] + sum(
                (per_lag[lag][past[:, lag - 1]] for lag in range(1, L + 1)), np.zeros((c, R)))
            y = rng.poisson(mu_true).astype(float)
            lq = logsumexp(_ll(y[:, None, None, :], mu_aux[None]) + lpi[None, :, None], axis=1)  # (c, S)
            d.append(lq[np.arange(c), s] - logsumexp(lq + lp[None, :], axis=1))
        if kept == L:
            out["sbs"] = _mc_result(np.concatenate(d), int(seed), "Monte Carlo", f"mixture over {S**L} states")
        else:
            method = f"Monte Carlo, auxiliary lower bound (L'={kept})"
            out["sbs"] = _mc_result(np.concatenate(d), int(seed), method,
                                    f"ISI mixture keeps {kept} of {L} lags, the rest at their mean; outputs "
                                    "from the full channel, so this is a lower bound on I_sbs")

    # --- dfe: past symbols known ----------------------------------------------------------------------
    if small:
        val, lost = _exact(lw, pi, p)
        out["dfe"] = RateResult(val, 0.0, "exact", 0, None, f"{tag}; neglected output mass {lost:.1e}")
    else:
        d = _dfe_mc(per_lag, base, p, n, rng, max(1, 1_000_000 // (S * S * R)))
        out["dfe"] = _mc_result(d, int(seed), "Monte Carlo",
                                f"past of {L} symbols drawn i.i.d., stratified over the current symbol")

    # --- mf: every other symbol known, slots k..k+L observed ------------------------------------------
    ctx_all = S ** (2 * L)
    mf_grid_size = grid.shape[0] ** (L + 1)
    if ctx_all * S * mf_grid_size <= exact_limit:
        ctx = state_digits(S, 2 * L) if L else np.zeros((1, 0), int)
        w = np.prod(p[ctx], axis=1) if L else np.ones(1)
        mus = _mf_means(per_lag, base, ctx, S)  # (G, S, L+1, R)
        g = _grid(mus.reshape(-1, (L + 1) * R).max(axis=0))
        lw_mf = _log_pmf(mus.reshape(-1, (L + 1) * R), g).reshape(ctx.shape[0], S, -1)
        val, lost = _exact(lw_mf, w, p)
        out["mf"] = RateResult(val, 0.0, "exact", 0, None,
                               f"{g.shape[0]} output points over {L + 1} slots; neglected output mass {lost:.1e}")
    else:
        def mf_means(c):
            ctx = rng.choice(S, size=(c, 2 * L), p=p)
            return _mf_means(per_lag, base, ctx, S).reshape(c, S, -1)

        d = _stratified(mf_means, p, n, rng, max(1, 1_000_000 // (S * S * (L + 1) * R)))
        out["mf"] = _mc_result(d, int(seed), "Monte Carlo",
                               f"{2 * L} other symbols drawn i.i.d., stratified over the current symbol")
    return {k: out[k] for k in ("sbs", "dfe", "mf")}

"""Scheme comparison and budget sweeps (capacity/compare.py) against independent computations on small channels.

Outside references named beside each check: the references sheet's [computed] binary-input Poisson capacities and
the Z-channel closed form; scipy.optimize over the input law with the mutual information summed here from
scipy.stats.poisson; a plain NumPy Blahut–Arimoto with its certified stopping rule (Arimoto 1972, Blahut 1972);
exact i.i.d. information rates of a memory-1 channel by enumerating output blocks through the forward recursion,
with the Cover & Thomas bracket (Thm 4.5.1); the single-letter bounds of the chain rule (Shamai, Ozarow, Wyner,
IEEE Trans. IT 37(6), 1991) summed exactly here.
"""

import csv
import itertools

import numpy as np
import pytest
from scipy import optimize
from scipy.special import xlogy
from scipy.stats import poisson

from capacity import Channel, Emitter, Medium, Receiver, Scenario, Signalling
from capacity.compare import CSV_FIELDS, SCHEMES, budget_sweep, compare_schemes
from capacity.physics.result import ChannelResponse
from capacity.schemes.detectors import DETECTORS

TS = 0.1  # symbol interval, s
PEAK = 20.0  # molecules of the "on" symbol


def _scenario(background, emitters=1, receivers=1, budget=None, memory=0):
    return Scenario(
        name="small",
        medium=Medium(diffusion=1e-10),
        emitters=tuple(Emitter(f"e{i}", (0.0, 2e-5 * i, 0.0)) for i in range(emitters)),
        receivers=tuple(Receiver(f"r{j}", (1e-5, 2e-5 * j, 0.0), 5e-6) for j in range(receivers)),
        channel=Channel(symbol_interval=TS, memory=memory, background=tuple(background), residual="interference",
                        seed=3),
        signalling=Signalling(scheme="amplitude", levels=2, peak=PEAK, budget=budget),
    )


def _response(hits):
    hits = np.asarray(hits, dtype=float)
    return ChannelResponse(hits, np.zeros(hits.shape[:2]), None, "lone", TS * np.arange(hits.shape[-1] + 1))


def _mi_bits(law, rows):
    """I(X; Y) in bits for an input law and rows W(y|x) (definition of mutual information, 0 log 0 = 0)."""
    q = law @ rows
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.where(rows > 0, rows * np.log2(rows / q[None, :]), 0.0)
    return float(law @ t.sum(axis=1))


def _onoff_rows(background, on_mean, y_top=80):
    """Poisson rows for the off and on symbols (scipy.stats; mass beyond y_top < 1e-30 for the means used)."""
    y = np.arange(y_top)
    return np.array([poisson.pmf(y, background), poisson.pmf(y, background + on_mean)])


def _best_onoff(background, on_mean, p_max=1.0):
    """max over P(on) <= p_max of I by scipy.optimize.minimize_scalar (I is concave in the law); (bits, P(on))."""
    rows = _onoff_rows(background, on_mean)
    res = optimize.minimize_scalar(lambda p: -_mi_bits(np.array([1 - p, p]), rows), bounds=(0.0, p_max),
                                   method="bounded", options={"xatol": 1e-10})
    return -res.fun, res.x


def _z_capacity(p):
    """Z-channel, P(Y=0|X=1) = p: log2(1 + (1-p) p^(p/(1-p))) (references sheet)."""
    return np.log2(1 + (1 - p) * p ** (p / (1 - p)))


# -- ISI-free capacity and budget handling -----------------------------------------------------------------------
@pytest.mark.parametrize("background, hit, reference", [
    # references sheet [computed]: background 0.5, on mean 0.5 + 5: 0.818277769791549 bits
    (0.5, 0.25, 0.818277769791549),
    # references sheet: no background, on mean 1 is the Z channel with p = e^-1 (closed form)
    (0.0, 0.05, _z_capacity(np.exp(-1.0))),
])
def test_single_slot_capacity_matches_outside_values(background, hit, reference):
    records = compare_schemes(_scenario([background]), _response([[[hit]]]), n_symbols=2000, n_runs=4,
                              detector_symbols=1000)
    assert [r["scheme"] for r in records] == ["amplitude"]  # one emitter: amplitude only (documented)
    rec = records[0]
    best, _ = _best_onoff(background, hit * PEAK)
    assert best == pytest.approx(reference, abs=1e-9)  # the scalar search reproduces the outside value
    assert rec["single_slot_capacity"] == pytest.approx(reference, abs=1e-8)
    assert reference <= rec["single_slot_capacity"] + rec["certified_gap"] + 1e-12  # certified bracket
    # memory 0: the i.i.d. rate at the capacity-achieving law is the capacity (within its standard errors)
    assert abs(rec["information_rate"] - reference) < 4 * rec["stderr"] + 1e-3
    assert rec["budget"] is None


@pytest.mark.parametrize("budget", [1.0, 4.0])
def test_budget_binds_as_an_independent_constrained_optimisation(budget):
    # mean molecules <= budget means P(on) <= budget / PEAK; the constrained optimum by scipy.optimize (bounded
    # search on the concave I); the unconstrained optimum P(on) ~ 0.45 lies above both caps, so they bind
    background, hit = 0.5, 0.25
    _, p_free = _best_onoff(background, hit * PEAK)
    assert p_free * PEAK > budget
    best, p_best = _best_onoff(background, hit * PEAK, p_max=budget / PEAK)
    rec = compare_schemes(_scenario([background]), _response([[[hit]]]), budget=budget, n_symbols=2000,
                          n_runs=4, detector_symbols=1000)[0]
    assert rec["budget"] == budget
    assert rec["single_slot_capacity"] == pytest.approx(best, abs=1e-8)
    assert rec["mean_molecules"] == pytest.approx(budget, rel=1e-8)
    assert rec["details"]["iid_input"][1] == pytest.approx(p_best, abs=1e-6)
    # per-second and per-molecule figures are the per-symbol rate divided by the interval / the molecules used
    assert rec["bits_per_second"] == pytest.approx(rec["information_rate"] / TS, rel=1e-12)
    assert rec["bits_per_molecule"] == pytest.approx(rec["information_rate"] / budget, rel=1e-8)
    # a budget from the scenario is used when none is passed
    rec2 = compare_schemes(_scenario([background], budget=budget), _response([[[hit]]]), n_symbols=2000,
                           n_runs=4, detector_symbols=1000)[0]
    assert rec2["budget"] == budget and rec2["single_slot_capacity"] == pytest.approx(best, abs=1e-8)


# -- information rate with memory against exact enumeration --------------------------------------------------------
MEM1 = (0.2, 0.15)  # hits per molecule at lags 0 and 1
BG1 = 0.5


def _memory1_branches(y_top):
    """Rows W[x_prev, x_now, :] of Poisson(BG1 + PEAK (h0 x_now + h1 x_prev)) on 0..y_top-2 plus a lumped tail."""
    out = np.empty((2, 2, y_top))
    for a, c in itertools.product((0, 1), repeat=2):
        mean = BG1 + PEAK * (MEM1[0] * c + MEM1[1] * a)
        out[a, c] = np.concatenate([poisson.pmf(np.arange(y_top - 1), mean), [poisson.sf(y_top - 2, mean)]])
    return out


def _iid_rate_bracket(p, n=4, y_top=26):
    """(lower, upper) bits on the i.i.d. information rate with P(on) = p of the memory-1 channel.

    h(Y) is bracketed by H(Y_n | Y^(n-1), X_0) <= h(Y) <= H(Y_n | Y^(n-1)) (Cover & Thomas, Thm 4.5.1), each
    block entropy by enumerating all y_top^n output blocks through the forward recursion; H(Y | X) is the average
    branch entropy. Outputs >= y_top - 1 are lumped (mass < 1e-6 per branch at the largest mean 7.5: a degraded
    channel whose rate is within ~1e-5 bits of the true one).
    """
    w = _memory1_branches(y_top)
    law = np.array([1 - p, p])
    trans = law[None, :, None] * w  # P(x_now) W(y | x_prev, x_now)

    def block(start, m):
        alpha = start[None, :]
        for _ in range(m):
            alpha = np.einsum("pa,acy->pyc", alpha, trans).reshape(-1, 2)
        pk = alpha.sum(axis=1)
        return -float(xlogy(pk, pk).sum())

    upper = block(law, n) - block(law, n - 1)
    lower = sum(law[s] * (block(np.eye(2)[s], n) - block(np.eye(2)[s], n - 1)) for s in (0, 1))
    h_cond = -float((law[:, None, None] * law[None, :, None] * xlogy(w, w)).sum())
    return (lower - h_cond) / np.log(2), (upper - h_cond) / np.log(2)


def _single_letter_bounds(p, y_top=60):
    """I_sbs, I_dfe, I_mf in bits for i.i.d. P(on) = p on the memory-1 channel, summed exactly (scipy.stats).

    sbs: I(X_k; Y_k), past symbol as noise; dfe: I(X_k; Y_k | X_(k-1)); mf: I(X_k; Y_k, Y_(k+1) | X_(k-1),
    X_(k+1)) (chain rule, Shamai, Ozarow, Wyner 1991; references sheet, single-letter bounds).
    """
    law = np.array([1 - p, p])
    y = np.arange(y_top)
    h0, h1 = PEAK * MEM1[0], PEAK * MEM1[1]
    rows = {(a, c): poisson.pmf(y, BG1 + h0 * c + h1 * a) for a in (0, 1) for c in (0, 1)}
    sbs = _mi_bits(law, np.array([sum(law[a] * rows[a, c] for a in (0, 1)) for c in (0, 1)]))
    dfe = sum(law[a] * _mi_bits(law, np.array([rows[a, c] for c in (0, 1)])) for a in (0, 1))
    mf = 0.0
    for a, nxt in itertools.product((0, 1), repeat=2):  # known past and next symbols
        # rows of the pair (Y_k, Y_(k+1)) given X_k = c: outer product, flattened
        pair = np.array([np.outer(rows[a, c], rows[c, nxt]).ravel() for c in (0, 1)])
        mf += law[a] * law[nxt] * _mi_bits(law, pair)
    return sbs, dfe, mf


def test_information_rate_and_bounds_with_memory_match_exact_enumeration():
    scen = _scenario([BG1], memory=1)
    rec = compare_schemes(scen, _response([[list(MEM1)]]), n_symbols=4000, n_runs=8, detector_symbols=1000)[0]
    d = rec["details"]
    p = d["iid_input"][1]  # the i.i.d. law the rates with ISI use (ISI-free optimum or one optimised with ISI)
    assert sum(d["iid_input"]) == pytest.approx(1.0, abs=1e-12) and rec["input_law"] == d["input_law_choice"]
    # the ISI-free capacity uses lag 0 only (documented): the on/off Poisson optimum with on mean PEAK h0
    assert rec["single_slot_capacity"] == pytest.approx(_best_onoff(BG1, PEAK * MEM1[0])[0], abs=1e-8)
    lo, hi = _iid_rate_bracket(p)
    assert hi - lo < 2.5e-3  # the bracket is far narrower than the estimate's 4 standard errors (~0.015)
    assert lo - 4 * rec["stderr"] < rec["information_rate"] < hi + 4 * rec["stderr"]
    # the single-letter bounds at that law, summed exactly here, and their chain-rule ordering
    sbs, dfe, mf = _single_letter_bounds(p)
    assert sbs <= dfe <= lo and hi <= mf
    assert d["bounds"]["sbs"]["rate"] == pytest.approx(sbs, abs=1e-9)
    assert d["bounds"]["dfe"]["rate"] == pytest.approx(dfe, abs=1e-9)
    assert d["bounds"]["mf"]["rate"] == pytest.approx(mf, abs=1e-9)
    # the reported bracket is the tightest of the bounds listed, and it holds the exact rate up to the standard
    # error of the estimated bound that sets each side
    low = d["lower_bounds"][rec["lower_bound_method"]]
    up = d["upper_bounds"][rec["upper_bound_method"]]
    assert rec["lower_bound"] == max(v["rate"] for v in d["lower_bounds"].values()) == low["rate"]
    assert rec["upper_bound"] == min(v["rate"] for v in d["upper_bounds"].values()) == up["rate"]
    assert max(sbs, dfe) - 1e-9 <= rec["lower_bound"] < hi + 4 * low["stderr"] + 1e-9
    assert lo - 4 * up["stderr"] - 1e-9 < rec["upper_bound"] <= mf + 1e-9


# -- budget sweep ---------------------------------------------------------------------------------------------------
def test_budget_sweep_points_csv_and_skipped_budgets(tmp_path):
    background, hit = 0.5, 0.25
    scen = _scenario([background])
    budgets = [5.0, 0.0, 100.0, 2.0]  # visited in increasing order; 0: skipped (no budget <= 0); 100: not binding
    path = tmp_path / "sweep" / "curve.csv"
    calls = []
    curves = budget_sweep(scen, _response([[[hit]]]), budgets, n_symbols=2000, n_runs=4, csv_path=path,
                          progress=lambda: calls.append(1))
    assert list(curves) == ["amplitude"]
    c = curves["amplitude"]
    assert set(c) == {"budget", "rate", "stderr", "lower", "upper", "single_slot", "symbol_interval"}
    assert c["symbol_interval"] == TS and len(calls) == 3
    assert c["budget"] == [2.0, 5.0, 100.0]
    assert all(len(c[k]) == 3 for k in ("rate", "stderr", "lower", "upper", "single_slot"))
    assert np.all(np.diff(c["rate"]) >= 0)  # non-decreasing by construction (documented)
    _, p_free = _best_onoff(background, hit * PEAK)
    rows = _onoff_rows(background, hit * PEAK)
    with open(path, newline="") as handle:
        table = list(csv.DictReader(handle))
    assert tuple(table[0]) == CSV_FIELDS and len(table) == 3
    for k, b in enumerate(c["budget"]):
        best, p_best = _best_onoff(background, hit * PEAK, p_max=min(1.0, b / PEAK))
        assert c["single_slot"][k] == pytest.approx(best, abs=1e-8)  # scipy.optimize, as above
        # molecules actually used: the budget, or the unconstrained optimum's mean cost when it does not bind
        assert float(table[k]["mean_molecules"]) == pytest.approx(min(b, p_free * PEAK), abs=1e-5)
        # memory 0: the rate is I at the law used (numpy sum), within its standard errors
        assert abs(c["rate"][k] - _mi_bits(np.array([1 - p_best, p_best]), rows)) < 4 * c["stderr"][k] + 1e-3
        assert float(table[k]["budget"]) == b and table[k]["scheme"] == "amplitude"
        assert float(table[k]["single_slot_capacity"]) == pytest.approx(c["single_slot"][k], abs=1e-12)
        assert float(table[k]["information_rate"]) == pytest.approx(c["rate"][k], abs=1e-12)


# -- every scheme on a two-emitter layout: labels, shapes and each ISI-free capacity ------------------------------
def _plain_blahut_arimoto(w, tol=1e-10, max_iter=200_000):
    """Textbook Blahut–Arimoto p <- p exp(D(W_x || pW)) / Z in NumPy (Arimoto 1972; Blahut 1972) with the
    certified stop max_x D - I < tol (nats); returns (lower, upper) bits."""
    p = np.full(w.shape[0], 1.0 / w.shape[0])
    for _ in range(max_iter):
        q = p @ w
        with np.errstate(divide="ignore", invalid="ignore"):
            d = np.where(w > 0, w * np.log(w / q[None, :]), 0.0).sum(axis=1)
        info = float(p @ d)
        if d.max() - info < tol:
            break
        p = p * np.exp(d - d.max())
        p /= p.sum()
    return info / np.log(2), float(d.max()) / np.log(2)


def test_every_scheme_is_reported_and_its_capacity_matches_plain_blahut_arimoto():
    # two emitters, one receiver (a shared receiver that hears them differently): every scheme applies, and zero
    # forcing, which needs at least as many receivers as emitters, must be listed as skipped with its reason
    hits = np.array([[[0.3]], [[0.12]]])  # (E=2, R=1, L+1=1)
    background = [0.5]
    scen = _scenario(background, emitters=2, receivers=1)
    records = compare_schemes(scen, _response(hits), n_symbols=1000, n_runs=2, detector_symbols=500)
    assert [r["scheme"] for r in records] == list(SCHEMES)  # two emitters: every scheme, in the documented order
    y = np.arange(60)  # Poisson mass beyond 59 < 1e-25 at the largest mean (8.9)
    for rec in records:
        assert set(CSV_FIELDS) <= set(rec) and rec["details"]["units"]["rates"] == "bits/symbol"
        symbols = np.asarray(rec["details"]["alphabet"])  # (S, E) molecules
        means = background[0] + symbols @ hits[:, 0, 0]  # (S,)
        lo, hi = _plain_blahut_arimoto(poisson.pmf(y[None, :], means[:, None]))
        assert lo - 1e-9 <= rec["single_slot_capacity"] <= hi + 1e-9
        assert len(rec["details"]["symbol_labels"]) == symbols.shape[0]
        names = [d["name"] for d in rec["detectors"]]
        # the threshold detector is listed only for two-symbol alphabets; every other detector always
        expected = [k for k in DETECTORS if k != "threshold" or symbols.shape[0] == 2]
        assert names == expected
        for d in rec["detectors"]:
            if d["name"] == "zero_forcing":
                assert d["rate"] is None and "receivers" in d["skipped"]
                continue
            assert 0.0 <= d["symbol_error_rate"] <= 1.0 and d["ser_interval"][0] <= d["symbol_error_rate"]
            assert d["bits_per_second"] == pytest.approx(d["rate"] / TS, rel=1e-12)
            # data processing (Cover & Thomas Thm 2.8.1): hard decisions carry at most the soft information; the
            # plug-in estimate's bias and noise are allowed for with 4 standard errors plus the bias bound
            assert d["rate"] <= rec["information_rate"] + 4 * rec["stderr"] + 0.05
    spatial = records[SCHEMES.index("spatial")]
    assert spatial["details"]["alphabet"] == [[0.0, 0.0], [PEAK, 0.0], [0.0, PEAK]]
    multiplex = records[SCHEMES.index("multiplex")]
    assert multiplex["details"]["alphabet"] == [[0.0, 0.0], [0.0, PEAK], [PEAK, 0.0], [PEAK, PEAK]]


def test_a_carried_row_keeps_the_single_slot_capacity_of_its_own_budget():
    # the carried law's rate columns come from the smaller budget (same law, same seed: the same estimate), but the
    # single-slot capacity is a function of the budget itself: it must be this budget's (checked against
    # scipy.optimize on the on-off channel, as in the test above)
    from capacity.compare import _row, carried_row
    from capacity.rates import link_rates
    from capacity.schemes.builders import build_alphabet

    background, hit = 0.5, 0.25
    scen = _scenario([background])
    alphabet = build_alphabet(scen.signalling, 1)
    rows = {}
    for b in (2.0, 5.0):
        rates = link_rates(scen, _response([[[hit]]]), alphabet, budget=b, n_symbols=1000, n_runs=2, seed=3)
        rows[b] = _row("amplitude", b, rates)
    out = carried_row(rows[2.0], rows[5.0])
    assert out["budget"] == 5.0
    assert out["single_slot_capacity"] == rows[5.0]["single_slot_capacity"]
    assert out["certified_gap"] == rows[5.0]["certified_gap"]
    best, _ = _best_onoff(background, hit * PEAK, p_max=5.0 / PEAK)
    assert out["single_slot_capacity"] == pytest.approx(best, abs=1e-8)
    assert out["single_slot_capacity"] > rows[2.0]["single_slot_capacity"]  # a larger budget carries more
    for k in ("information_rate", "stderr", "lower_bound", "upper_bound", "mean_molecules", "bits_per_second"):
        assert out[k] == rows[2.0][k]
    assert out["input_law"].startswith("carried from budget 2")

"""Detectors and their simulated performance (capacity.schemes.detectors)."""

import itertools
import math

import numpy as np
import pytest
from scipy.stats import poisson

from capacity.errors import InputError
from capacity.scenario.types import Signalling
from capacity.schemes.builders import build_alphabet
from capacity.schemes.detectors import (
    DETECTORS,
    DetectorResult,
    detector_performance,
    draw_preamble,
    make_problem,
    map_threshold,
    simulate,
    slot_means,
    threshold_error,
    threshold_error_rate,
    wilson_interval,
)
from capacity.schemes.detectors.decision_feedback import decision_feedback
from capacity.schemes.detectors.symbol_map import symbol_map
from capacity.schemes.detectors.viterbi import viterbi
from capacity.schemes.detectors.zero_forcing import zero_forcing, zero_forcing_estimate


def _ook(peak=1000.0):
    return build_alphabet(Signalling(scheme="amplitude", levels=2, peak=peak), 1)


def _memoryless_hits(p):
    return np.asarray(p, dtype=float).reshape(1, 1, 1)


def _poisson_tail_error(tau, lam0, lam1, p0, p1):
    """½[P(Y >= τ | 0) + P(Y < τ | 1)] generalised to priors, by direct summation of the Poisson pmf (math)."""
    def cdf(k, lam):  # P(Y <= k)
        return sum(math.exp(-lam) * lam**i / math.factorial(i) for i in range(int(k) + 1)) if k >= 0 else 0.0
    return p0 * (1.0 - cdf(tau - 1, lam0)) + p1 * cdf(tau - 1, lam1)


# -- the channel model -------------------------------------------------------------------------------------------
def test_slot_means_match_explicit_convolution():
    rng = np.random.default_rng(3)
    hits = rng.uniform(0, 0.01, size=(2, 3, 3))
    a = build_alphabet(Signalling(scheme="multiplex", levels=2, peak=500.0), 2)
    prob = make_problem(hits, [0.5, 1.0, 0.2], a, np.full(4, 0.25), interference=[0.1, 0.0, 0.3],
                        preamble=[3, 1])
    idx = rng.integers(0, 4, size=7)
    full = np.concatenate([[3, 1], idx])  # preamble then data
    # explicit sum over emitters, receivers and lags (the counting model of the design notes)
    expected = np.zeros((7, 3))
    for k in range(7):
        for j in range(3):
            m = [0.5, 1.0, 0.2][j] + [0.1, 0.0, 0.3][j]
            for lag in range(3):
                for i in range(2):
                    m += a.symbols[full[k + 2 - lag], i] * hits[i, j, lag]
            expected[k, j] = m
    np.testing.assert_allclose(slot_means(idx, prob), expected, rtol=1e-13)


# -- zero forcing ------------------------------------------------------------------------------------------------
def test_zero_forcing_recovers_inputs_on_noiseless_channel():
    rng = np.random.default_rng(1)
    hits = rng.uniform(0.001, 0.02, size=(3, 4, 1))  # no ISI, 3 emitters, 4 receivers (R >= E)
    a = build_alphabet(Signalling(scheme="multiplex", levels=3, peak=900.0), 3)
    prob = make_problem(hits, [2.0, 1.0, 0.5, 3.0], a, np.full(a.size, 1.0 / a.size))
    idx = np.arange(a.size)
    y = slot_means(idx, prob)  # noiseless counts = the means
    # pinv is a left inverse of a full-column-rank matrix (linear algebra): exact recovery
    np.testing.assert_allclose(zero_forcing_estimate(y, prob), a.symbols, atol=1e-8)
    np.testing.assert_array_equal(zero_forcing(y, prob), idx)


def test_zero_forcing_needs_enough_receivers():
    a = build_alphabet(Signalling(scheme="spatial", peak=100.0), 2)
    prob = make_problem(np.full((2, 1, 1), 0.01), [1.0], a, np.full(3, 1 / 3))
    with pytest.raises(InputError, match="at least as many receivers as emitters"):
        zero_forcing(np.zeros((5, 1)), prob)


# -- threshold (on-off keying) -----------------------------------------------------------------------------------
@pytest.mark.parametrize("lam0, lam1, p1", [(1.0, 6.0, 0.5), (0.5, 3.0, 0.3), (2.0, 20.0, 0.5), (0.0, 2.0, 0.5),
                                            (0.0, 2.0, 0.05)])
def test_map_threshold_matches_brute_force_and_tails(lam0, lam1, p1):
    p0 = 1.0 - p1
    # brute force: smallest z with p1 P(z|1) >= p0 P(z|0), scanning scipy.stats.poisson.logpmf
    z = np.arange(200)
    ok = np.log(p1) + poisson.logpmf(z, lam1) >= np.log(p0) + poisson.logpmf(z, lam0)
    assert np.all(ok[np.argmax(ok):])  # monotone likelihood ratio: a threshold rule
    tau = map_threshold(lam0, lam1, p0, p1)
    assert tau == float(np.argmax(ok))
    # closed form equals the Poisson tail sums, computed here by direct pmf summation
    t2, pe = threshold_error(lam0, lam1, p0, p1)
    assert t2 == tau
    assert pe == pytest.approx(_poisson_tail_error(tau, lam0, lam1, p0, p1), rel=1e-12)
    # MAP minimises the error over all thresholds (brute force over thresholds)
    others = [_poisson_tail_error(t, lam0, lam1, p0, p1) for t in range(0, 60)]
    assert pe <= min(others) * (1 + 1e-12)


def test_ook_threshold_simulation_within_4_se_of_poisson_tails():
    # no ISI, background 1, on-level mean 1 + 5: equiprobable OOK
    hits, bg = _memoryless_hits(0.005), [1.0]
    a = _ook()
    n = 20_000
    res = detector_performance("threshold", hits, bg, a, [0.5, 0.5], n_symbols=n, seed=11)
    lam0, lam1 = 1.0, 6.0
    tau_bf = next(t for t in range(100) if poisson.pmf(t, lam1) >= poisson.pmf(t, lam0))  # scipy.stats
    exact = 0.5 * (poisson.sf(tau_bf - 1, lam0) + poisson.cdf(tau_bf - 1, lam1))  # ½[P(Y>=τ|0) + P(Y<τ|1)]
    se = math.sqrt(exact * (1 - exact) / n)
    assert abs(res.symbol_error_rate - exact) < 4 * se
    assert res.closed_form_ser == pytest.approx(exact, rel=1e-12)
    prob = make_problem(hits, bg, a, [0.5, 0.5])
    assert threshold_error_rate(prob) == (float(tau_bf), pytest.approx(exact, rel=1e-12))
    assert res.ser_interval[0] <= res.symbol_error_rate <= res.ser_interval[1]
    assert res.bit_error_rate == res.symbol_error_rate  # one bit per OOK symbol


def test_threshold_closed_form_refuses_isi():
    hits = np.zeros((1, 1, 2))
    hits[0, 0] = [0.005, 0.002]
    with pytest.raises(InputError, match="without ISI"):
        threshold_error_rate(make_problem(hits, [1.0], _ook(), [0.5, 0.5]))


# -- sequence and decision-feedback detectors against brute force ------------------------------------------------
def _brute_force_sequence(y, hits, offset, symbols, law, preamble, use_prior):
    """argmax over all S^n sequences of Σ_k [ln π_s + Σ_j ln Poisson(y_kj; μ_kj)] (scipy.stats.poisson.logpmf)."""
    n, big_l = y.shape[0], hits.shape[2] - 1
    seqs = np.array(list(itertools.product(range(symbols.shape[0]), repeat=n)))  # (S^n, n) every sequence
    full = np.concatenate([np.broadcast_to(np.asarray(preamble, dtype=int), (len(seqs), big_l)), seqs], axis=1)
    mu = np.broadcast_to(offset, (len(seqs), n, len(offset))).copy()
    for lag in range(big_l + 1):
        mu += np.einsum("qke,er->qkr", symbols[full[:, big_l - lag: big_l - lag + n]], hits[:, :, lag])
    total = poisson.logpmf(y[None, :, :], mu).sum(axis=(1, 2))
    if use_prior:
        total = total + np.log(law)[seqs].sum(axis=1)
    return seqs[np.argmax(total)]


@pytest.mark.parametrize("scheme, n_e, levels, lags, use_prior", [
    ("amplitude", 1, 2, 3, True),
    ("amplitude", 1, 3, 2, False),
    ("spatial", 2, 2, 2, True),
])
def test_viterbi_equals_brute_force_sequence_search(scheme, n_e, levels, lags, use_prior):
    rng = np.random.default_rng(7)
    a = build_alphabet(Signalling(scheme=scheme, levels=levels, peak=400.0), n_e)
    s = a.size
    law = rng.dirichlet(np.ones(s) * 3)
    hits = rng.uniform(0.002, 0.01, size=(n_e, 2, lags)) * np.array([1.0, 0.8, 0.6])[:lags]
    offset = np.array([0.7, 1.3])
    n = 6
    for trial in range(6):
        prob = draw_preamble(make_problem(hits, offset, a, law, prior=use_prior), rng)
        _, y = simulate(prob, n, rng)
        expected = _brute_force_sequence(y, hits, offset, a.symbols, law, prob.preamble, use_prior)
        np.testing.assert_array_equal(viterbi(y, prob), expected, err_msg=f"trial {trial}")


def test_decision_feedback_equals_direct_loop():
    # an independent plain loop: per slot, subtract ISI of the decided past, pick argmax of scipy logpmf + ln prior
    rng = np.random.default_rng(5)
    a = build_alphabet(Signalling(scheme="amplitude", levels=3, peak=600.0), 1)
    hits = np.array([[[0.01, 0.006, 0.003]], ]).reshape(1, 1, 3)
    law = np.array([0.5, 0.3, 0.2])
    prob = draw_preamble(make_problem(hits, [1.0], a, law), rng)
    _, y = simulate(prob, 300, rng)
    dec = list(prob.preamble)
    for k in range(300):
        mu = np.array([1.0 + sum(a.symbols[dec[-lag], 0] * hits[0, 0, lag] for lag in (1, 2))])
        scores = [poisson.logpmf(y[k], mu + a.symbols[s, 0] * hits[0, 0, 0]).sum() + math.log(law[s])
                  for s in range(3)]
        dec.append(int(np.argmax(scores)))
    np.testing.assert_array_equal(decision_feedback(y, prob), dec[2:])


def test_without_isi_sequence_detectors_reduce_to_symbol_map():
    rng = np.random.default_rng(2)
    a = build_alphabet(Signalling(scheme="amplitude", levels=4, peak=900.0), 1)
    prob = make_problem(np.full((1, 1, 1), 0.01), [1.0], a, np.full(4, 0.25))
    _, y = simulate(prob, 500, rng)
    d = symbol_map(y, prob)
    np.testing.assert_array_equal(viterbi(y, prob), d)
    np.testing.assert_array_equal(decision_feedback(y, prob), d)


def test_sequence_detection_helps_under_strong_isi():
    # strong tail: Viterbi (optimal sequence detector) should not lose to symbol-by-symbol (expected behaviour)
    hits = np.array([0.004, 0.004, 0.003]).reshape(1, 1, 3)
    a = _ook(1000.0)
    res = {k: detector_performance(k, hits, [1.0], a, [0.5, 0.5], n_symbols=5000, seed=4)
           for k in ("symbol_map", "decision_feedback", "viterbi")}
    assert res["viterbi"].symbol_error_rate < res["symbol_map"].symbol_error_rate
    assert res["viterbi"].ser_interval[0] < res["decision_feedback"].ser_interval[1]


# -- rates -------------------------------------------------------------------------------------------------------
def _soft_information(lams, law, y_max=200):
    """I(X; Y) in bits for a memoryless Poisson channel by direct summation over y (scipy.stats.poisson.pmf)."""
    y = np.arange(y_max)
    w = np.array([poisson.pmf(y, lam) for lam in lams])  # (S, Y)
    assert np.all(1.0 - w.sum(1) < 1e-12)  # truncation mass negligible
    py = law @ w
    ratio = np.where(w > 0, w / np.where(py > 0, py, 1.0), 1.0)
    return float((law[:, None] * w * np.log2(ratio)).sum())


def test_hard_decision_rate_below_soft_information():
    # data-processing inequality (Cover & Thomas, Thm 2.8.1): I(X; X-hat) <= I(X; Y)
    a = build_alphabet(Signalling(scheme="amplitude", levels=4, peak=2000.0), 1)
    law = np.array([0.4, 0.2, 0.2, 0.2])
    hits, bg = _memoryless_hits(0.01), [1.0]
    soft = _soft_information(1.0 + 0.01 * a.symbols[:, 0], law)
    for name in ("symbol_map", "viterbi"):
        r = detector_performance(name, hits, bg, a, law, n_symbols=20_000, seed=8)
        assert r.rate <= soft + 4 * r.rate_stderr
        assert r.rate > 0.5 * soft  # the decisions do carry most of it (MAP on a good channel)


def test_hard_rate_matches_exact_binary_channel_of_the_threshold():
    # threshold on OOK, no ISI: the decisions form a binary channel with crossover probabilities given by Poisson
    # tails (scipy.stats); its mutual information is computed here directly and the plug-in estimate must agree
    lam0, lam1, p1 = 1.0, 6.0, 0.3
    tau = map_threshold(lam0, lam1, 1 - p1, p1)
    e01 = poisson.sf(tau - 1, lam0)  # P(decide on | off)
    e10 = poisson.cdf(tau - 1, lam1)  # P(decide off | on)
    w = np.array([[1 - e01, e01], [e10, 1 - e10]])
    law = np.array([1 - p1, p1])
    py = law @ w
    exact = float((law[:, None] * w * np.log2(w / py[None, :])).sum())
    r = detector_performance("threshold", _memoryless_hits(0.005), [1.0], _ook(), law, n_symbols=20_000, seed=21)
    assert abs(r.rate - exact) < 4 * r.rate_stderr + 1e-4  # + plug-in bias (~1/(2 n ln 2) bits)
    assert r.rate <= _soft_information([lam0, lam1], law) + 4 * r.rate_stderr


def test_memoryless_map_error_rate_matches_direct_summation():
    # exact SER of the symbol MAP rule, one receiver, no ISI: Σ_s π_s Σ_y P(y|s)·1[ŝ(y) ≠ s],
    # with ŝ(y) = argmax_s π_s P(y|s) from scipy.stats.poisson.pmf, summed over y (truncation mass < 1e-12)
    a = build_alphabet(Signalling(scheme="amplitude", levels=4, peak=1500.0), 1)
    law = np.array([0.4, 0.3, 0.2, 0.1])
    lams = 0.8 + 0.006 * a.symbols[:, 0]
    y = np.arange(120)
    w = np.array([poisson.pmf(y, lam) for lam in lams])  # (S, Y)
    assert np.all(1.0 - w.sum(1) < 1e-12)
    decide = np.argmax(law[:, None] * w, axis=0)  # (Y,)
    exact = float(sum(law[s] * w[s, decide != s].sum() for s in range(4)))
    n = 20_000
    r = detector_performance("symbol_map", _memoryless_hits(0.006), [0.8], a, law, n_symbols=n, seed=17)
    assert abs(r.symbol_error_rate - exact) < 4 * math.sqrt(exact * (1 - exact) / n)


def test_rate_standard_error_matches_spread_over_seeds():
    # independent Monte Carlo: the delta-method standard error should match the spread of the plug-in rate over
    # independent runs (loose factor-of-two band: 12 runs give the standard deviation to about ±20 %)
    a = build_alphabet(Signalling(scheme="amplitude", levels=3, peak=1000.0), 1)
    runs = [detector_performance("symbol_map", _memoryless_hits(0.004), [1.0], a, np.full(3, 1 / 3),
                                 n_symbols=2000, seed=100 + k) for k in range(12)]
    spread = np.std([r.rate for r in runs], ddof=1)
    claimed = np.mean([r.rate_stderr for r in runs])
    assert 0.5 * claimed < spread < 2.0 * claimed


def test_wilson_interval_matches_scipy():
    # Wilson (1927) score interval; outside reference: scipy.stats.binomtest(...).proportion_ci(method="wilson")
    from scipy.stats import binomtest

    for k, n in [(0, 10), (5, 10), (37, 2000), (1999, 2000)]:
        ci = binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
        lo, hi = wilson_interval(k, n)
        assert lo == pytest.approx(ci.low, abs=1e-12) and hi == pytest.approx(ci.high, abs=1e-12)
    assert wilson_interval(0, 10)[1] == pytest.approx(0.2775, abs=1e-4)  # textbook value [memory]


def test_interference_acts_as_extra_background():
    # the model adds the constant interference to the background mean (design notes): same seed, same draws
    rng = np.random.default_rng(9)
    hits = rng.uniform(0.002, 0.01, size=(2, 2, 2))
    a = build_alphabet(Signalling(scheme="spatial", peak=500.0), 2)
    law = np.full(3, 1 / 3)
    r1 = detector_performance("viterbi", hits, [1.0, 0.5], a, law, n_symbols=500, seed=3, interference=[0.5, 1.5])
    r2 = detector_performance("viterbi", hits, [1.5, 2.0], a, law, n_symbols=500, seed=3)
    np.testing.assert_array_equal(r1.confusion, r2.confusion)


def test_zero_forcing_on_product_alphabet_is_per_emitter_nearest_level():
    # for a product alphabet the nearest release vector is the nearest level per emitter (separable distance)
    rng = np.random.default_rng(4)
    hits = rng.uniform(0.002, 0.02, size=(2, 3, 1))
    a = build_alphabet(Signalling(scheme="multiplex", levels=4, peak=900.0), 2)
    prob = make_problem(hits, [1.0, 1.0, 1.0], a, np.full(a.size, 1 / a.size))
    _, y = simulate(prob, 400, rng)
    xhat = zero_forcing_estimate(y, prob)
    levels = np.unique(a.symbols)
    per = levels[np.argmin(np.abs(xhat[:, :, None] - levels[None, None, :]), axis=2)]  # (n, E)
    np.testing.assert_array_equal(a.symbols[zero_forcing(y, prob)], per)


def test_viterbi_second_call_does_not_recompile():
    from capacity.schemes.detectors.viterbi import _viterbi_core

    rng = np.random.default_rng(0)
    prob = draw_preamble(make_problem(np.full((1, 1, 3), 0.004), [1.0], _ook(), [0.5, 0.5]), rng)
    _, y = simulate(prob, 64, rng)
    viterbi(y, prob)
    before = _viterbi_core._cache_size()
    _, y2 = simulate(prob, 64, rng)
    viterbi(y2, prob)
    assert _viterbi_core._cache_size() == before


# -- contract and errors -----------------------------------------------------------------------------------------
@pytest.mark.parametrize("name", sorted(DETECTORS))
def test_every_detector_returns_a_complete_result(name):
    a2 = build_alphabet(Signalling(scheme="amplitude", levels=2, peak=800.0), 2)  # 2 emitters, one silent
    hits = np.zeros((2, 2, 2))
    hits[:, :, 0] = [[0.008, 0.002], [0.002, 0.008]]
    hits[:, :, 1] = 0.001
    r = detector_performance(name, hits, [0.5, 0.5], a2, [0.6, 0.4], n_symbols=2000, seed=0)
    assert isinstance(r, DetectorResult) and r.name == name
    assert r.confusion.shape == (2, 2) and r.confusion.sum() == r.n_symbols == 2000
    assert r.symbol_error_rate == pytest.approx(1 - np.trace(r.confusion) / 2000)
    assert r.ser_interval[0] <= r.symbol_error_rate <= r.ser_interval[1]
    assert r.ber_interval[0] <= r.bit_error_rate <= r.ber_interval[1]
    assert 0.0 <= r.rate <= 1.0 and r.rate_stderr >= 0.0 and r.message


def test_detector_errors():
    a = build_alphabet(Signalling(scheme="amplitude", levels=4, peak=800.0), 1)
    hits = np.full((1, 1, 2), 0.01)
    with pytest.raises(InputError, match="unknown detector"):
        detector_performance("oracle", hits, [1.0], a, np.full(4, 0.25))
    with pytest.raises(InputError, match="two-symbol"):
        detector_performance("threshold", hits, [1.0], a, np.full(4, 0.25))
    with pytest.raises(InputError, match="summing to 1"):
        detector_performance("symbol_map", hits, [1.0], a, [0.5, 0.5, 0.5, 0.5])
    # the full trellis is refused; viterbi() then falls back to a reduced-state trellis (tested below)
    from capacity.schemes.detectors.problem import make_problem
    from capacity.schemes.detectors.viterbi import trellis

    with pytest.raises(InputError, match="states"):
        trellis(make_problem(np.full((1, 1, 8), 0.001), np.array([1.0]), a, np.full(4, 0.25)))
    with pytest.raises(InputError, match="shape"):
        detector_performance("symbol_map", np.full((2, 1, 2), 0.01), [1.0], a, np.full(4, 0.25))


def test_reduced_state_viterbi_on_a_long_memory_channel():
    """When S^L is beyond the trellis limit, Viterbi keeps the first lags and treats the rest as mean interference
    (auxiliary channel, Arnold et al. 2006). It must still beat the symbol-by-symbol detector, which ignores the
    structure of the ISI (common practice: sequence detection is never worse than symbol detection in expectation
    on a channel it models nearly exactly; here the dropped lags carry 0.2 % of the signal)."""
    from capacity.schemes.alphabet import Alphabet
    from capacity.schemes.detectors import detector_performance
    from capacity.schemes.detectors.problem import make_problem
    from capacity.schemes.detectors.viterbi import MAX_STATES, kept_lags, reduced_problem

    lags = np.array([0.30, 0.25, 0.15] + [1e-4] * 12)  # L = 14: 2^14 states, beyond the 4096 limit
    hits = lags[None, None, :]
    ook = Alphabet("amplitude", np.array([[0.0], [20.0]]), ("0", "20"), np.array([[0], [1]]))
    law = np.array([0.5, 0.5])
    problem = make_problem(hits, np.array([0.5]), ook, law)
    kept = kept_lags(problem)
    assert 2 ** kept <= MAX_STATES < 2 ** problem.memory
    # the reduced receiver's mean count, averaged over the input law, equals the full channel's (mean matching)
    red = reduced_problem(problem._replace(preamble=np.zeros(problem.memory, dtype=np.int64)), kept)
    full_mean = 0.5 + 10.0 * lags.sum()
    assert red.offset[0] + 10.0 * lags[: kept + 1].sum() == pytest.approx(full_mean, rel=1e-12)
    vit = detector_performance("viterbi", hits, np.array([0.5]), ook, law, n_symbols=3000, seed=5)
    sml = detector_performance("symbol_map", hits, np.array([0.5]), ook, law, n_symbols=3000, seed=5)
    assert "reduced-state" in vit.message
    se = np.sqrt(sml.symbol_error_rate * (1 - sml.symbol_error_rate) / 3000)
    assert vit.symbol_error_rate < sml.symbol_error_rate - 4 * se


# -- bit error rate with multi-bit Gray labels against a brute-force count ---------------------------------------
def _reflected_gray(bits):
    """Binary reflected Gray code words as 0/1 rows, built by reflection (Gray, US patent 2,632,058, 1953):
    G(1) = 0, 1; G(n) = 0·G(n−1) followed by 1·reverse(G(n−1))."""
    words = [[0], [1]]
    for _ in range(bits - 1):
        words = [[0] + w for w in words] + [[1] + w for w in reversed(words)]
    return np.array(words, dtype=np.int64)


def _expected_labels(scheme, levels, emitters):
    """The documented labels, built independently: Gray along the levels (amplitude), per-emitter Gray words
    concatenated in itertools.product order, emitter 0 first (multiplex with a power-of-two level count)."""
    g = _reflected_gray(int(math.log2(levels)))
    if scheme == "amplitude":
        return g
    return np.array([np.concatenate([g[d] for d in digits])
                     for digits in itertools.product(range(levels), repeat=emitters)])


@pytest.mark.parametrize("scheme, levels, emitters, detector, lags", [
    ("amplitude", 4, 1, "symbol_map", 1),
    ("amplitude", 8, 1, "symbol_map", 1),
    ("amplitude", 8, 1, "viterbi", 2),
    ("multiplex", 4, 2, "symbol_map", 1),
])
def test_bit_error_rate_matches_brute_force_hamming_count(scheme, levels, emitters, detector, lags):
    # brute force (definition of the bit error rate): every (sent, decided) pair of the run, from its confusion
    # matrix, weighted by the Hamming distance between the two independently built Gray words, over n·B bits
    a = build_alphabet(Signalling(scheme=scheme, levels=levels, peak=1500.0), emitters)
    labels = _expected_labels(scheme, levels, emitters)
    np.testing.assert_array_equal(a.bits, labels)
    rng = np.random.default_rng(31)
    hits = rng.uniform(0.004, 0.01, size=(emitters, emitters, lags)) * np.array([1.0, 0.4])[:lags]
    law = rng.dirichlet(np.full(a.size, 4.0))
    n = 4000
    r = detector_performance(detector, hits, np.full(emitters, 0.8), a, law, n_symbols=n, seed=12)
    ham = (labels[:, None, :] != labels[None, :, :]).sum(axis=2)  # (S, S) Hamming distances
    brute = float((r.confusion * ham).sum()) / (n * labels.shape[1])
    assert r.bit_error_rate == pytest.approx(brute, rel=1e-14, abs=0.0)
    assert r.ber_interval[0] <= r.bit_error_rate <= r.ber_interval[1]
    # discriminating: the run has errors, some flipping several bits, and plain binary labels would count a
    # different number of bit errors
    assert r.symbol_error_rate > 0.02 and np.any((r.confusion > 0) & (ham > 1))
    nat = np.array([[int(c) for c in np.binary_repr(k, labels.shape[1])] for k in range(a.size)])
    nat_ham = (nat[:, None, :] != nat[None, :, :]).sum(axis=2)
    assert float((r.confusion * nat_ham).sum()) != float((r.confusion * ham).sum())


def test_gray_bit_error_rate_matches_exact_symbol_map_expectation():
    # exact expected BER of the symbol MAP rule, one receiver, no ISI, 8 levels: Σ_s π_s Σ_y P(y|s) d_H(g(s),
    # g(ŝ(y))) / B with ŝ(y) = argmax_s π_s P(y|s) (scipy.stats.poisson.pmf, truncation mass < 1e-12) and Gray
    # words built by reflection; the simulated BER must lie within 4 conservative standard errors (symbols as
    # trials, sqrt(BER(1-BER)/n)), and plain binary labels would give a clearly different value
    a = build_alphabet(Signalling(scheme="amplitude", levels=8, peak=2000.0), 1)
    g = _reflected_gray(3)
    law = np.full(8, 1 / 8)
    lams = 1.0 + 0.01 * a.symbols[:, 0]
    y = np.arange(120)
    w = np.array([poisson.pmf(y, lam) for lam in lams])  # (S, Y)
    assert np.all(1.0 - w.sum(1) < 1e-12)
    decide = np.argmax(law[:, None] * w, axis=0)

    def expected(labels):
        ham = (labels[:, None, :] != labels[None, :, :]).sum(axis=2)
        return float(sum(law[s] * (w[s] * ham[s, decide]).sum() for s in range(8))) / labels.shape[1]

    exact = expected(g)
    natural = expected(np.array([[int(c) for c in np.binary_repr(k, 3)] for k in range(8)]))
    n = 20_000
    se = math.sqrt(exact * (1 - exact) / n)
    assert natural - exact > 10 * se  # Gray labels halve the damage of neighbour slips here
    r = detector_performance("symbol_map", _memoryless_hits(0.01), [1.0], a, law, n_symbols=n, seed=23)
    assert abs(r.bit_error_rate - exact) < 4 * se

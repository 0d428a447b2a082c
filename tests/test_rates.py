"""The rate pipeline (link_rates) tied together on small hand-made channels."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from capacity import Channel, Emitter, Medium, Receiver, Scenario, Signalling
from capacity.physics.result import ChannelResponse
from capacity.rates import link_rates, residual_interference
from capacity.schemes.alphabet import Alphabet


def _scenario(background=0.5, ts=0.1, budget=None, residual="interference"):
    return Scenario(
        name="hand-made",
        medium=Medium(diffusion=1e-10),
        emitters=(Emitter("a", (0.0, 0.0, 0.0)),),
        receivers=(Receiver("b", (1e-5, 0.0, 0.0), 5e-6),),
        channel=Channel(symbol_interval=ts, memory=0, background=(background,), residual=residual, seed=3),
        signalling=Signalling(scheme="amplitude", levels=2, peak=20.0, budget=budget),
    )


def _ook(peak=20.0):
    return Alphabet("amplitude", np.array([[0.0], [peak]]), ("e0:0", "e0:20"), np.array([[0], [1]]))


def _response(hits, tail=None):
    hits = np.asarray(hits, dtype=float)
    tail = np.zeros(hits.shape[:2]) if tail is None else np.asarray(tail, dtype=float)
    return ChannelResponse(hits, tail, None, "lone", 0.1 * np.arange(hits.shape[-1] + 1))


def _poisson_mi(law, means, ymax=200):
    """I(X;Y) in bits by direct summation over y (scipy.stats Poisson pmf; definition of mutual information)."""
    y = np.arange(ymax)
    w = np.array([stats.poisson.pmf(y, m) for m in means])
    q = law @ w
    with np.errstate(divide="ignore", invalid="ignore"):
        terms = np.where(w > 0, w * np.log2(w / q), 0.0)
    return float(law @ terms.sum(axis=1))


def test_memoryless_link_rate_equals_single_slot_capacity():
    """With one slot of memory (L = 0) the i.i.d. rate at the capacity-achieving law is the capacity itself."""
    s = _scenario()
    rates = link_rates(s, _response([[[0.2]]]), _ook(), n_symbols=4000, n_runs=8)
    cap = rates.isi_free
    # independent: mutual information by direct summation (scipy.stats) at the reported optimal law
    direct = _poisson_mi(np.asarray(cap.input_distribution), [0.5, 0.5 + 20 * 0.2])
    assert cap.capacity == pytest.approx(direct, abs=1e-8)
    assert rates.information_rate.rate == pytest.approx(cap.capacity, abs=4 * rates.information_rate.stderr + 2e-3)
    for key in ("sbs", "dfe", "mf"):
        assert rates.bounds[key].rate == pytest.approx(cap.capacity, abs=4 * rates.bounds[key].stderr + 2e-3)


def test_budget_binds_and_per_unit_arithmetic():
    s = _scenario(budget=4.0)
    rates = link_rates(s, _response([[[0.2, 0.05]]]), _ook(), n_symbols=3000, n_runs=4)
    assert rates.isi_free.mean_cost == pytest.approx(4.0, abs=1e-6)
    assert rates.mean_molecules == pytest.approx(4.0, abs=1e-6)
    d = rates.to_dict()
    assert d["bits_per_second"]["information_rate"] == pytest.approx(d["information_rate"] / 0.1)
    assert d["bits_per_molecule"]["information_rate"] == pytest.approx(d["information_rate"] / 4.0)
    # the matched-filter genie is an upper bound on the i.i.d. rate (references.md, single-letter bounds)
    assert d["information_rate"] <= d["upper_bound"] + 4 * d["stderr"] + 1e-3


def test_residual_interference_is_mean_release_times_tail():
    symbols = np.array([[0.0, 0.0], [10.0, 0.0], [0.0, 30.0]])
    law = np.array([0.5, 0.25, 0.25])
    tail = np.array([[0.01, 0.02], [0.03, 0.04]])
    # E[x] = (2.5, 7.5); sum_i E[x_i] tail[i, j]
    assert residual_interference(tail, symbols, law) == pytest.approx([2.5 * 0.01 + 7.5 * 0.03,
                                                                        2.5 * 0.02 + 7.5 * 0.04])


def test_interference_lowers_rate_and_drop_ignores_it():
    hits = [[[0.2, 0.02]]]
    tail = [[0.05]]
    keep = link_rates(_scenario(), _response(hits, tail), _ook(), n_symbols=3000, n_runs=4, seed=1)
    drop = link_rates(_scenario(residual="drop"), _response(hits, tail), _ook(), n_symbols=3000, n_runs=4, seed=1)
    assert np.all(drop.interference == 0)
    assert np.all(keep.interference > 0)
    # more noise at the same law: the ISI-as-noise bound cannot rise (data-processing; common practice)
    se = keep.bounds["sbs"].stderr + drop.bounds["sbs"].stderr
    assert keep.bounds["sbs"].rate <= drop.bounds["sbs"].rate + 4 * se + 1e-9


def test_binomial_counting_is_reported_beside_poisson():
    """Fixed release counts: exact binomial law. For on-off keying with no background the binomial channel is the
    Z-channel with p = (1 - h)^N (references.md, 'The same reduction holds for binomial ... counts')."""
    import dataclasses

    s = _scenario(background=0.0)
    s = s.replace(channel=dataclasses.replace(s.channel, counting="binomial", background=(0.0,)))
    n, h = 10, 0.1
    rates = link_rates(s, _response([[[h]]]), _ook(peak=float(n)), n_symbols=2000, n_runs=4)
    z = (1 - h) ** n
    expected = np.log2(1 + (1 - z) * z ** (z / (1 - z)))
    assert rates.binomial["single_slot_capacity"] == pytest.approx(expected, abs=1e-8)
    # Poisson thinning gives the Z-channel with p = exp(-N h) instead (references.md, Poisson channels)
    zp = np.exp(-n * h)
    assert rates.isi_free.capacity == pytest.approx(np.log2(1 + (1 - zp) * zp ** (zp / (1 - zp))), abs=1e-8)
    assert rates.binomial["max_tv"] > 0


def test_capacity_per_molecule_matches_the_divergence_formula():
    """Verdú (1990): C_cost = sup_x D(W_x || W_0) / b(x); for Poisson counts with background l0 and hit
    probability p, D = (l0 + pN) ln(1 + pN/l0) - pN (references.md, capacity per unit cost)."""
    s = _scenario(background=1.0, budget=5.0)
    rates = link_rates(s, _response([[[0.1]]]), _ook(peak=20.0), n_symbols=2000, n_runs=4)
    n, p, l0 = 20.0, 0.1, 1.0
    expected = ((l0 + p * n) * np.log(1 + p * n / l0) - p * n) / n / np.log(2)
    assert rates.unit_cost["bits_per_molecule"] == pytest.approx(expected, rel=1e-6)
    # it bounds every budgeted bits-per-molecule figure from above (C(P)/P is non-increasing; Verdu 1990)
    assert rates.isi_free.capacity / rates.isi_free.mean_cost <= expected * (1 + 1e-9)

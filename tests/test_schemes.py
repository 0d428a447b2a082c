"""Signalling alphabets and their bit labels (capacity.schemes.builders / labelling)."""

import itertools
import math

import numpy as np
import pytest

from capacity.errors import InputError
from capacity.scenario.types import Signalling
from capacity.schemes.builders import (
    MAX_SYMBOLS,
    amplitude_levels,
    build_alphabet,
    check_budget,
    hybrid_alphabet,
    multiplex_alphabet,
)
from capacity.schemes.labelling import bits_per_symbol, gray_labels

SCHEMES = ["amplitude", "spatial", "multiplex", "hybrid"]


def _hamming(a, b):
    return int(np.abs(np.asarray(a, dtype=int) - np.asarray(b, dtype=int)).sum())


@pytest.mark.parametrize("scheme", SCHEMES)
@pytest.mark.parametrize("levels", [2, 3, 4])
def test_alphabets_cost_what_they_claim(scheme, levels):
    peak = 800.0
    n_e = 3
    a = build_alphabet(Signalling(scheme=scheme, levels=levels, peak=peak, emitter=1), n_e)
    sym = np.asarray(a.symbols, dtype=float)
    assert sym.shape == (a.size, n_e)
    # cost is the total release of the symbol (definition in the design notes)
    np.testing.assert_array_equal(a.cost, sym.sum(axis=1))
    # whole molecules, each level in [0, peak] (builders round to integers)
    np.testing.assert_array_equal(sym, np.rint(sym))
    assert sym.min() >= 0 and sym.max() <= peak
    # every symbol distinct, labels distinct and as many as symbols
    assert len({tuple(r) for r in sym}) == a.size
    assert len(set(a.labels)) == a.size == len(a.labels)
    # B = ceil(log2 S) bits, labels distinct (common practice: one label per symbol)
    assert a.bits.shape == (a.size, math.ceil(math.log2(a.size)))
    assert len({tuple(r) for r in a.bits}) == a.size


def test_spatial_symbols_release_exactly_peak_from_one_emitter():
    a = build_alphabet(Signalling(scheme="spatial", peak=640.0, silent=True), 4)
    assert a.size == 5  # 4 emitters + "none fires"
    firing = a.symbols[a.cost > 0]
    assert firing.shape == (4, 4)
    np.testing.assert_array_equal((firing > 0).sum(axis=1), np.ones(4))  # exactly one emitter fires
    np.testing.assert_array_equal(firing.sum(axis=1), np.full(4, 640.0))  # exactly peak molecules
    assert sorted(np.argmax(firing, axis=1).tolist()) == [0, 1, 2, 3]  # each emitter once
    silent = build_alphabet(Signalling(scheme="spatial", peak=640.0, silent=False), 4)
    assert silent.size == 4 and silent.cost.min() == 640.0


def test_amplitude_levels_uniform_in_square_root():
    # variance-stabilising placement (Anscombe 1948): sqrt-levels equally spaced, then rounded; built here
    # independently from numpy.linspace
    for m, peak in [(2, 1000.0), (4, 1000.0), (6, 5000.0)]:
        expected = np.rint(np.linspace(0.0, math.sqrt(peak), m) ** 2)
        np.testing.assert_array_equal(amplitude_levels(m, peak), expected)
    a = build_alphabet(Signalling(scheme="amplitude", levels=2, peak=500.0), 1)
    np.testing.assert_array_equal(a.symbols[:, 0], [0.0, 500.0])  # 2 levels = on-off keying
    assert a.labels == ("e0:0", "e0:500")


def test_explicit_amplitudes_are_rounded_and_sorted():
    a = build_alphabet(Signalling(scheme="amplitude", amplitudes=(20.6, 0.0, 10.4)), 2)
    np.testing.assert_array_equal(a.symbols[:, 0], [0.0, 10.0, 21.0])
    np.testing.assert_array_equal(a.symbols[:, 1], [0.0, 0.0, 0.0])


def test_multiplex_is_the_full_product():
    levels = np.array([0.0, 100.0, 400.0])
    a = multiplex_alphabet(levels, 3)
    # independent enumeration with itertools.product
    assert {tuple(r) for r in a.symbols} == set(itertools.product(levels.tolist(), repeat=3))
    assert a.size == 27 and a.bits.shape == (27, 5)  # ceil(log2 27) = 5
    assert a.labels[1] == "e0:0+e1:0+e2:100"


def test_hybrid_counts_and_labels():
    a = hybrid_alphabet(np.array([0.0, 250.0, 1000.0]), 2, silent=True)
    assert a.size == 2 * 2 + 1  # (levels - 1) non-zero amplitudes x E emitters + silence
    assert a.labels == ("none", "e0:250", "e0:1000", "e1:250", "e1:1000")
    assert np.all((a.symbols > 0).sum(axis=1) <= 1)  # at most one emitter fires


@pytest.mark.parametrize("size", [2, 3, 4, 5, 8, 11, 16])
def test_gray_labels_differ_in_one_bit_between_neighbours(size):
    # binary reflected Gray code property (Gray 1953): consecutive code words differ in exactly one bit
    g = gray_labels(size)
    assert g.shape == (size, math.ceil(math.log2(size)))
    for k in range(size - 1):
        assert _hamming(g[k], g[k + 1]) == 1
    assert bits_per_symbol(size) == math.ceil(math.log2(size))


def test_amplitude_alphabet_is_gray_along_levels():
    a = build_alphabet(Signalling(scheme="amplitude", levels=8, peak=1000.0), 1)
    order = np.argsort(a.symbols[:, 0])
    for k in range(a.size - 1):
        assert _hamming(a.bits[order[k]], a.bits[order[k + 1]]) == 1


def test_multiplex_labels_are_per_emitter_gray():
    # concatenated per-emitter Gray labels: a one-level slip on one emitter flips exactly one bit
    a = build_alphabet(Signalling(scheme="multiplex", levels=4, peak=900.0), 2)
    lv = np.unique(a.symbols)
    rank = {v: i for i, v in enumerate(lv)}
    for s, t in itertools.combinations(range(a.size), 2):
        ds = [abs(rank[a.symbols[s, e]] - rank[a.symbols[t, e]]) for e in range(2)]
        if sorted(ds) == [0, 1]:
            assert _hamming(a.bits[s], a.bits[t]) == 1


# -- bad input ----------------------------------------------------------------------------------------------------
def test_levels_below_two_rejected():
    with pytest.raises(InputError, match="at least 2 levels"):
        build_alphabet(Signalling(scheme="amplitude", levels=1), 1)
    with pytest.raises(InputError, match="at least 2 levels"):
        build_alphabet(Signalling(scheme="multiplex", levels=1), 2)


def test_spatial_with_one_emitter_rejected_with_amplitude_suggestion():
    for scheme in ["spatial", "multiplex", "hybrid"]:
        with pytest.raises(InputError, match="needs at least 2 emitters.*amplitude"):
            build_alphabet(Signalling(scheme=scheme), 1)


def test_budget_no_alphabet_can_meet_rejected():
    # spatial without silence: every symbol costs peak, so a smaller mean budget is infeasible
    with pytest.raises(InputError, match="cheapest symbol costs 500"):
        build_alphabet(Signalling(scheme="spatial", peak=500.0, silent=False, budget=100.0), 2)
    with pytest.raises(InputError, match="positive"):
        build_alphabet(Signalling(scheme="amplitude", budget=0.0), 1)
    # a budget above the dearest symbol is not binding: accepted
    a = build_alphabet(Signalling(scheme="amplitude", peak=500.0, budget=1e6), 1)
    check_budget(a, 1e6)
    # explicit levels without 0: the cheapest symbol costs 100
    with pytest.raises(InputError, match="cheapest symbol costs 100"):
        build_alphabet(Signalling(scheme="amplitude", amplitudes=(100.0, 200.0), budget=50.0), 1)


def test_other_bad_settings_rejected():
    with pytest.raises(InputError, match="emitter index"):
        build_alphabet(Signalling(scheme="amplitude", emitter=2), 2)
    with pytest.raises(InputError, match="unknown scheme"):
        build_alphabet(Signalling(scheme="chirp"), 2)
    with pytest.raises(InputError, match="coincide"):
        build_alphabet(Signalling(scheme="amplitude", levels=6, peak=3.0), 1)
    with pytest.raises(InputError, match="distinct"):
        build_alphabet(Signalling(scheme="amplitude", amplitudes=(0.0, 10.2, 9.8)), 1)
    with pytest.raises(InputError, match=f"more than {MAX_SYMBOLS}"):
        build_alphabet(Signalling(scheme="multiplex", levels=8, peak=1000.0), 5)
    with pytest.raises(InputError, match="positive number of molecules"):
        build_alphabet(Signalling(scheme="spatial", peak=-1.0), 2)


def test_labels_take_the_emitters_names():
    # the numeric labels and the named ones describe the same release vectors, symbol for symbol
    a = build_alphabet(Signalling(scheme="hybrid", levels=3, peak=60.0), 2)
    named = a.named(["sender-west", "sender-east"])
    assert named.labels[0] == a.labels[0]
    for plain, nice, row in zip(a.labels[1:], named.labels[1:], a.symbols[1:], strict=True):
        i = int(np.argmax(row))
        assert nice == plain.replace(f"e{i}:", ["sender-west", "sender-east"][i] + ":")
        assert nice.endswith(f":{int(row[i])}")
    assert np.array_equal(named.symbols, a.symbols) and np.array_equal(named.bits, a.bits)

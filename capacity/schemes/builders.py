"""Signalling schemes: the alphabets of release vectors a layout can use.

An alphabet is a set of S release vectors x_s (molecules per emitter at the start of a slot, shape (S, E)); the
cost of a symbol is the total number of molecules it releases, Σ_i x_s[i]. Four schemes:

* ``amplitude`` — one emitter (``signalling.emitter``) sends one of M levels, 0 included (M = 2: on-off keying).
* ``spatial`` — one of the E emitters releases ``peak`` molecules (plus, with ``silent``, the symbol "none fires").
* ``multiplex`` — every emitter sends its own level at once: the product alphabet, S = M^E.
* ``hybrid`` — which emitter fires and how much: the M−1 non-zero levels on each of the E emitters, plus silence.

Levels. With ``signalling.amplitudes`` given, those are the levels (sorted). Otherwise M levels are placed between
0 and ``peak`` uniformly in the square root, a_k = peak·(k/(M−1))², k = 0..M−1. This is the variance-stabilising
placement for Poisson counting: √Y of a Poisson count has nearly constant variance (≈ 1/4, Anscombe, Biometrika
35, 1948), so levels equally spaced in √(mean) are about equally easy to tell apart; it is common practice for
amplitude-modulated photon- and molecule-counting links. It is a default, not an optimum: the capacity stage
chooses the input law on whatever levels are given.

Integers. Molecules are whole: every level is rounded to the nearest integer (``numpy.rint``, halves to even). If
two levels coincide after rounding (peak too small for M levels) an InputError is raised.

Budget. The mean-molecules-per-symbol budget is enforced later by the input distribution (Blahut–Arimoto with a
cost constraint). Here we only check that SOME input law on the alphabet can meet it: a budget below the cheapest
symbol's cost cannot be met (InputError). A budget at or above the dearest symbol's cost is simply not binding
(every law meets it); that is allowed and not an error.
"""

from __future__ import annotations

import itertools
import math

import numpy as np

from capacity.errors import InputError
from capacity.scenario.types import Signalling
from capacity.schemes.alphabet import Alphabet
from capacity.schemes.labelling import (
    gray_labels,
    natural_labels,
    product_labels,
    product_symbol_name,
    symbol_name,
)

MAX_SYMBOLS = 4096
"""Largest alphabet the builders make (a product alphabet grows as M^E; the capacity stage scales with S)."""


# -- levels -------------------------------------------------------------------------------------------------------
def amplitude_levels(levels: int, peak: float) -> np.ndarray:
    """M levels from 0 to ``peak`` molecules, uniform in √x: a_k = rint(peak·(k/(M−1))²), shape (M,), float.

    levels : M >= 2 (number of levels, 0 included).
    peak : largest release, molecules (> 0).
    Raises InputError if M < 2, peak <= 0, or two levels coincide after rounding to whole molecules.
    """
    if isinstance(levels, bool) or not isinstance(levels, (int, np.integer)) or levels < 2:
        raise InputError("signalling.levels", levels, "needs at least 2 levels (0 and one non-zero release)",
                         "use levels = 2 for on-off keying, or more for multi-level amplitude signalling")
    peak = _check_peak(peak)
    k = np.arange(int(levels), dtype=float)
    raw = peak * (k / float(levels - 1)) ** 2
    out = np.rint(raw)
    if np.unique(out).size != out.size:
        raise InputError("signalling.levels", int(levels),
                         f"{levels} levels do not fit between 0 and peak = {peak:g} molecules once rounded to "
                         "whole molecules (two levels coincide)",
                         "use fewer levels or a larger peak")
    return out


def resolve_levels(signalling: Signalling) -> np.ndarray:
    """The level set of ``signalling`` in molecules, sorted, rounded to integers, shape (M,).

    ``signalling.amplitudes`` when given (validated: finite, >= 0, at least two distinct after rounding), else
    :func:`amplitude_levels` (``signalling.levels``, ``signalling.peak``).
    """
    if signalling.amplitudes is None:
        return amplitude_levels(signalling.levels, signalling.peak)
    a = np.asarray(signalling.amplitudes, dtype=float).reshape(-1)
    if a.size == 0 or not np.all(np.isfinite(a)) or np.any(a < 0):
        raise InputError("signalling.amplitudes", signalling.amplitudes,
                         "must be finite, non-negative numbers of molecules",
                         "give levels such as [0, 250, 1000]")
    out = np.sort(np.rint(a))
    if np.unique(out).size != out.size:
        raise InputError("signalling.amplitudes", signalling.amplitudes,
                         "levels must be distinct after rounding to whole molecules", "remove the repeated levels")
    if out.size < 2:
        raise InputError("signalling.amplitudes", signalling.amplitudes, "needs at least 2 levels",
                         "give at least two levels, e.g. [0, 1000] for on-off keying")
    return out


def _check_peak(peak: float) -> float:
    p = float(peak)
    if not math.isfinite(p) or p <= 0:
        raise InputError("signalling.peak", peak, "must be a positive number of molecules",
                         "give a peak such as 1000")
    if np.rint(p) < 1:
        raise InputError("signalling.peak", peak, "rounds to 0 molecules", "give a peak of at least 1 molecule")
    return p


def _check_emitters(n_emitters: int, scheme: str) -> int:
    if isinstance(n_emitters, bool) or not isinstance(n_emitters, (int, np.integer)) or n_emitters < 1:
        raise InputError("emitters", n_emitters, "the layout needs at least one emitter", "add an emitter")
    if scheme != "amplitude" and n_emitters < 2:
        raise InputError("signalling.scheme", scheme,
                         f"the {scheme} scheme needs at least 2 emitters and the layout has {n_emitters}",
                         "use scheme = \"amplitude\" with one emitter, or add emitters")
    return int(n_emitters)


def _check_size(size: int, scheme: str) -> None:
    if size > MAX_SYMBOLS:
        raise InputError("signalling.levels", size,
                         f"the {scheme} alphabet would have {size} symbols (more than {MAX_SYMBOLS})",
                         "use fewer levels or fewer emitters, or the spatial/hybrid scheme")


# -- the four schemes ---------------------------------------------------------------------------------------------
def amplitude_alphabet(levels: np.ndarray, n_emitters: int, emitter: int = 0) -> Alphabet:
    """Amplitude signalling from one emitter.

    levels : shape (M,), molecules (sorted, distinct, whole; 0 normally included; M = 2 with 0 is on-off keying).
    n_emitters : E, emitters in the layout (the others stay silent).
    emitter : index of the signalling emitter, 0 <= emitter < E.
    Returns an Alphabet with symbols (M, E), labels ``"e<emitter>:<molecules>"``, Gray bit labels along the level
    order.
    """
    n_emitters = _check_emitters(n_emitters, "amplitude")
    if isinstance(emitter, bool) or not isinstance(emitter, (int, np.integer)) or not 0 <= emitter < n_emitters:
        raise InputError("signalling.emitter", emitter,
                         f"must be an emitter index in 0..{n_emitters - 1} (the layout has {n_emitters})",
                         "give the index of an existing emitter")
    a = np.asarray(levels, dtype=float)
    symbols = np.zeros((a.size, n_emitters))
    symbols[:, int(emitter)] = a
    labels = tuple(f"e{int(emitter)}:{int(v)}" for v in a)
    return Alphabet("amplitude", symbols, labels, gray_labels(a.size))


def spatial_alphabet(n_emitters: int, peak: float, silent: bool = True) -> Alphabet:
    """Spatial signalling: which emitter releases ``peak`` molecules.

    n_emitters : E >= 2.  peak : molecules per firing (rounded to an integer).
    silent : if True, "none fires" (the zero vector) is symbol 0.
    Returns symbols (E + silent, E): rows of rint(peak)·I (after the zero row), natural binary labels.
    """
    n_emitters = _check_emitters(n_emitters, "spatial")
    amount = np.rint(_check_peak(peak))
    symbols = amount * np.eye(n_emitters)
    if silent:
        symbols = np.vstack([np.zeros((1, n_emitters)), symbols])
    labels = tuple(symbol_name(s) for s in symbols)
    return Alphabet("spatial", symbols, labels, natural_labels(symbols.shape[0]))


def multiplex_alphabet(levels: np.ndarray, n_emitters: int) -> Alphabet:
    """Multiplexed amplitude signalling: every emitter sends its own level in the same slot.

    levels : shape (M,), molecules, shared by every emitter.  n_emitters : E >= 2.
    Returns the product alphabet, symbols (M^E, E) in :func:`itertools.product` order (emitter 0 the slowest
    digit), labels ``"e0:<a>+e1:<b>+..."``; bits are concatenated per-emitter Gray labels when M is a power of two,
    natural binary otherwise (see :mod:`capacity.schemes.labelling`).
    """
    n_emitters = _check_emitters(n_emitters, "multiplex")
    a = np.asarray(levels, dtype=float)
    _check_size(a.size ** n_emitters, "multiplex")
    symbols = np.array(list(itertools.product(a, repeat=n_emitters)), dtype=float).reshape(-1, n_emitters)
    bits, _ = product_labels(a.size, n_emitters)
    labels = tuple(product_symbol_name(s) for s in symbols)
    return Alphabet("multiplex", symbols, labels, bits)


def hybrid_alphabet(levels: np.ndarray, n_emitters: int, silent: bool = True) -> Alphabet:
    """Hybrid signalling: one emitter fires, with one of the non-zero levels.

    levels : shape (M,), molecules; the zero level (if present) is not a firing level.  n_emitters : E >= 2.
    silent : if True, "none fires" is symbol 0.
    Returns symbols ((M_nz)·E + silent, E) ordered emitter by emitter, levels ascending; natural binary labels.
    """
    n_emitters = _check_emitters(n_emitters, "hybrid")
    a = np.asarray(levels, dtype=float)
    nz = a[a > 0]
    if nz.size == 0:
        raise InputError("signalling.amplitudes", tuple(a.tolist()), "has no non-zero level to fire",
                         "include at least one positive level")
    rows = [np.eye(n_emitters)[e] * v for e in range(n_emitters) for v in nz]
    if silent:
        rows = [np.zeros(n_emitters)] + rows
    symbols = np.array(rows, dtype=float)
    _check_size(symbols.shape[0], "hybrid")
    labels = tuple(symbol_name(s) for s in symbols)
    return Alphabet("hybrid", symbols, labels, natural_labels(symbols.shape[0]))


# -- budget and the front door ------------------------------------------------------------------------------------
def check_budget(alphabet: Alphabet, budget: float | None) -> None:
    """Raise InputError when no input law on ``alphabet`` can have mean cost <= ``budget`` (molecules/symbol).

    Feasible iff budget >= min_s cost(s) (a point mass on the cheapest symbol meets it). ``None`` means no mean
    constraint. A budget >= max_s cost(s) is not binding (every law meets it) and is accepted.
    """
    if budget is None:
        return
    b = float(budget)
    if not math.isfinite(b) or b <= 0:
        raise InputError("signalling.budget", budget, "must be a positive number of molecules per symbol",
                         "give a budget such as 200, or leave it out for no mean constraint")
    cheapest = float(alphabet.cost.min())
    if b < cheapest:
        raise InputError("signalling.budget", budget,
                         f"no input law on the {alphabet.scheme} alphabet can meet it: the cheapest symbol costs "
                         f"{cheapest:g} molecules",
                         f"raise the budget to at least {cheapest:g}, or allow a silent symbol (silent = true)")


def _amplitude(signalling: Signalling, n_emitters: int) -> Alphabet:
    return amplitude_alphabet(resolve_levels(signalling), n_emitters, signalling.emitter)


def _spatial(signalling: Signalling, n_emitters: int) -> Alphabet:
    return spatial_alphabet(n_emitters, signalling.peak, signalling.silent)


def _multiplex(signalling: Signalling, n_emitters: int) -> Alphabet:
    _check_emitters(n_emitters, "multiplex")
    return multiplex_alphabet(resolve_levels(signalling), n_emitters)


def _hybrid(signalling: Signalling, n_emitters: int) -> Alphabet:
    _check_emitters(n_emitters, "hybrid")
    return hybrid_alphabet(resolve_levels(signalling), n_emitters, signalling.silent)


SCHEMES = {"amplitude": _amplitude, "spatial": _spatial, "multiplex": _multiplex, "hybrid": _hybrid}
"""Scheme name -> builder(signalling, n_emitters)."""


def build_alphabet(signalling: Signalling, n_emitters: int) -> Alphabet:
    """The alphabet of ``signalling.scheme`` for a layout with ``n_emitters`` emitters.

    signalling : the scheme settings (levels or explicit amplitudes, peak, emitter, silent, budget).
    n_emitters : E, number of emitters in the layout.
    Returns an :class:`Alphabet` with symbols (S, E) in whole molecules. Raises InputError for an unknown scheme,
    fewer than 2 levels, a scheme the layout cannot support (spatial/multiplex/hybrid with one emitter), an
    emitter index out of range, or a budget no input law on the alphabet can meet (see :func:`check_budget`).
    """
    builder = SCHEMES.get(signalling.scheme)
    if builder is None:
        raise InputError("signalling.scheme", signalling.scheme,
                         f"unknown scheme; choose one of {sorted(SCHEMES)}",
                         "set scheme to \"amplitude\", \"spatial\", \"multiplex\" or \"hybrid\"")
    alphabet = builder(signalling, n_emitters)
    check_budget(alphabet, signalling.budget)
    return alphabet

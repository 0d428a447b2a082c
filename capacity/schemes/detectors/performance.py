"""Error rates and hard-decision rates of the detectors, by simulation of the Poisson counting channel with ISI.

:func:`detector_performance` draws n i.i.d. symbols from the input law (after a random known preamble of L
symbols), simulates the counts (see :mod:`capacity.schemes.detectors.problem`), runs the named detector and
reports:

* symbol error rate with a 95 % Wilson score interval (Wilson, JASA 22, 1927);
* bit error rate (bit labels from the alphabet) with a 95 % Wilson interval computed with the n SYMBOLS as trials:
  the per-symbol error fraction e_k/B lies in [0, 1], so its variance is at most BER(1−BER) and the interval is
  conservative (bit errors inside one symbol are not independent, so n·B trials would be too narrow);
* rate: the mutual information I(X; X̂) in bits/symbol of the empirical joint law of (sent, decided), i.e. of the
  confusion matrix / n. This is the rate a code could reach on the memoryless channel seen through the hard
  decisions with ideal interleaving (with ISI the decision errors are correlated in time, which this single-letter
  figure ignores). Its standard error is the delta-method one, sqrt(Var[i(X; X̂)]/n) with
  i = log2 p(x, x̂)/(p(x) p(x̂)) (e.g. Basharin-type asymptotics for plug-in information estimates [memory]); the
  plug-in estimate is biased upwards by about (K_x − 1)(K_x̂ − 1)/(2 n ln 2) bits for K_x, K_x̂ occupied rows and
  columns (Miller–Madow-type correction, Paninski, Neural Comput. 15, 2003), reported in the message.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

from capacity.errors import InputError
from capacity.schemes.alphabet import Alphabet
from capacity.schemes.detectors.problem import draw_preamble, make_problem, simulate
from capacity.schemes.detectors.table import DETECTORS
from capacity.schemes.detectors.threshold import threshold_error_rate

CLOSED_FORMS = {"threshold": threshold_error_rate}
"""Detector name -> exact error rate on an ISI-free problem: ``f(problem) -> (threshold, symbol error rate)``."""

Z95 = 1.959963984540054  # two-sided 95 % standard normal quantile (scipy.stats.norm.ppf(0.975))


class DetectorResult(NamedTuple):
    """Simulated performance of one detector.

    name : detector name (a key of DETECTORS).
    symbol_error_rate : fraction of symbols decided wrongly.
    ser_interval : 95 % Wilson interval (low, high) for the symbol error rate.
    bit_error_rate : fraction of label bits decided wrongly (B = alphabet.bits.shape[1] bits per symbol).
    ber_interval : conservative 95 % Wilson interval (low, high) for the bit error rate (symbols as trials).
    rate : I(X; X̂) of the empirical confusion matrix, bits per symbol (plug-in; see ``message`` for its bias).
    confusion : (S, S) int64 counts, [sent, decided].
    n_symbols : symbols scored.
    message : readable summary (seed, preamble, rate bias, closed form where one exists).
    rate_stderr : delta-method standard error of ``rate``, bits per symbol.
    closed_form_ser : exact symbol error rate where a closed form exists (threshold without ISI), else None.
    """

    name: str
    symbol_error_rate: float
    ser_interval: tuple[float, float]
    bit_error_rate: float
    ber_interval: tuple[float, float]
    rate: float
    confusion: np.ndarray
    n_symbols: int
    message: str
    rate_stderr: float = 0.0
    closed_form_ser: float | None = None


def wilson_interval(successes: float, trials: int, z: float = Z95) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion: (p̂ + z²/2n ± z sqrt(p̂(1−p̂)/n + z²/4n²)) / (1 + z²/n)."""
    n = float(trials)
    p = float(successes) / n
    denom = 1.0 + z * z / n
    centre = (p + z * z / (2.0 * n)) / denom
    half = z * math.sqrt(p * (1.0 - p) / n + z * z / (4.0 * n * n)) / denom
    return max(0.0, centre - half), min(1.0, centre + half)


def confusion_information(confusion: np.ndarray) -> tuple[float, float, float]:
    """Plug-in mutual information of a confusion matrix of counts (S, S'), bits.

    Returns (I, delta-method standard error, approximate upward bias (K_x − 1)(K_y − 1)/(2 n ln 2)).
    """
    c = np.asarray(confusion, dtype=float)
    n = c.sum()
    joint = c / n
    px, py = joint.sum(1), joint.sum(0)
    mask = joint > 0
    info = np.zeros_like(joint)
    info[mask] = np.log2(joint[mask] / (px[:, None] * py[None, :])[mask])
    rate = float((joint * info).sum())
    var = float((joint * info**2).sum()) - rate**2
    stderr = math.sqrt(max(var, 0.0) / n)
    bias = (np.count_nonzero(px) - 1) * (np.count_nonzero(py) - 1) / (2.0 * n * math.log(2.0))
    return max(rate, 0.0), stderr, float(bias)


def detector_performance(detector_name: str, hits, background, alphabet: Alphabet, input_law, *,
                         n_symbols: int = 20_000, seed: int = 0, interference=None,
                         prior: bool = True) -> DetectorResult:
    """Simulate a detector on the Poisson counting channel with ISI.

    detector_name : a key of :data:`DETECTORS` (``zero_forcing``, ``symbol_map``, ``threshold``, ``viterbi``,
        ``decision_feedback``).
    hits : (E, R, L+1) hit probabilities per molecule (ChannelResponse.hits).
    background : (R,) mean background counts per slot.
    alphabet : Alphabet with symbols (S, E) in molecules and bit labels (S, B).
    input_law : (S,) symbol probabilities (i.i.d. symbols are drawn from it; the MAP detectors use it as prior).
    n_symbols : symbols scored (after an L-symbol known preamble), >= 100.
    seed : seed of the numpy Generator used for symbols, preamble and counts.
    interference : optional (R,) constant mean interference counts per slot (e.g. ISI beyond lag L), known to the
        detectors and added to the counts.
    prior : True: MAP detectors use ``input_law`` as prior; False: maximum likelihood (flat prior).
    Returns a :class:`DetectorResult`. Raises InputError for an unknown detector, bad shapes, or a detector that
    cannot run on this layout/alphabet.
    """
    detect = DETECTORS.get(detector_name)
    if detect is None:
        raise InputError("detector", detector_name, f"unknown detector; choose one of {sorted(DETECTORS)}",
                         "pick a name from capacity.schemes.detectors.DETECTORS")
    if isinstance(n_symbols, bool) or not isinstance(n_symbols, (int, np.integer)) or n_symbols < 100:
        raise InputError("n_symbols", n_symbols, "must be an integer >= 100", "use e.g. 20000")
    rng = np.random.default_rng(seed)
    problem = make_problem(hits, background, alphabet, input_law, interference=interference, prior=prior)
    problem = draw_preamble(problem, rng)
    sent, counts = simulate(problem, n_symbols, rng)
    decided = np.asarray(detect(counts, problem), dtype=np.int64)

    n_s = problem.size
    confusion = np.zeros((n_s, n_s), dtype=np.int64)
    np.add.at(confusion, (sent, decided), 1)
    n = int(n_symbols)
    errors = int(np.count_nonzero(sent != decided))
    bits = np.asarray(alphabet.bits, dtype=np.int64)
    n_bits = bits.shape[1]
    bit_errors = np.abs(bits[sent] - bits[decided]).sum(axis=1)  # (n,) per-symbol bit errors
    ber = float(bit_errors.sum()) / (n * n_bits)
    rate, rate_se, bias = confusion_information(confusion)

    closed, note = None, ""
    if detector_name == "viterbi":
        from capacity.schemes.detectors.viterbi import kept_lags

        kept = kept_lags(problem)
        if kept < problem.memory:
            note = (f"; reduced-state sequence detection: the trellis keeps {kept} of {problem.memory} lags, the "
                    "rest as mean interference")
    exact = CLOSED_FORMS.get(detector_name)
    if exact is not None and not np.any(problem.hits[:, :, 1:] > 0):
        tau, closed = exact(problem)
        note = f"; closed-form SER {closed:.6g} at threshold {tau:g} (Poisson tails)"
    message = (f"{detector_name}: {errors} symbol errors in {n} symbols (seed {seed}, S = {n_s}, L = "
               f"{problem.memory}, {'MAP' if prior else 'ML'} decisions); rate is the plug-in I(X; X-hat), "
               f"biased upwards by about {bias:.2g} bits{note}")
    return DetectorResult(
        name=detector_name,
        symbol_error_rate=errors / n,
        ser_interval=wilson_interval(errors, n),
        bit_error_rate=ber,
        ber_interval=wilson_interval(ber * n, n),
        rate=rate,
        confusion=confusion,
        n_symbols=n,
        message=message,
        rate_stderr=rate_se,
        closed_form_ser=closed,
    )

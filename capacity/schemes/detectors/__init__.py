"""Detectors for the Poisson counting channel with ISI, and their simulated performance.

Every detector is a function ``detect(counts, problem) -> indices``: counts (n, R) per slot and receiver, a
:class:`DetectionProblem` (hits (E, R, L+1), offset = background + interference (R,), symbols (S, E), input law,
known preamble), returning the decided symbol indices (n,).

Public names:
    DETECTORS                 name -> detector: zero_forcing, symbol_map, threshold, viterbi, decision_feedback
    detector_performance      simulate one detector -> DetectorResult (SER, BER with Wilson intervals, rate)
    DetectorResult            its result type
    CLOSED_FORMS              name -> exact error rate where one exists (threshold without ISI)
    DetectionProblem, make_problem, simulate, slot_means   the channel model the detectors share
    map_threshold, threshold_error, threshold_error_rate   on-off keying: MAP threshold and closed-form error
    wilson_interval, confusion_information                 the statistics used in the report
"""

from capacity.schemes.detectors.performance import (
    CLOSED_FORMS,
    DetectorResult,
    confusion_information,
    detector_performance,
    wilson_interval,
)
from capacity.schemes.detectors.problem import DetectionProblem, draw_preamble, make_problem, simulate, slot_means
from capacity.schemes.detectors.table import DETECTORS
from capacity.schemes.detectors.threshold import map_threshold, threshold_error, threshold_error_rate

__all__ = [
    "CLOSED_FORMS",
    "DETECTORS",
    "DetectionProblem",
    "DetectorResult",
    "confusion_information",
    "detector_performance",
    "draw_preamble",
    "make_problem",
    "map_threshold",
    "simulate",
    "slot_means",
    "threshold_error",
    "threshold_error_rate",
    "wilson_interval",
]

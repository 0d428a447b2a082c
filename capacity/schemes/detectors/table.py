"""The table of detectors: name -> function(counts (n, R), problem) -> symbol indices (n,)."""

from __future__ import annotations

from capacity.schemes.detectors.decision_feedback import decision_feedback
from capacity.schemes.detectors.symbol_map import symbol_map
from capacity.schemes.detectors.threshold import threshold
from capacity.schemes.detectors.viterbi import viterbi
from capacity.schemes.detectors.zero_forcing import zero_forcing

DETECTORS = {
    "zero_forcing": zero_forcing,
    "symbol_map": symbol_map,
    "threshold": threshold,
    "viterbi": viterbi,
    "decision_feedback": decision_feedback,
}
"""Detector name -> ``detect(counts, problem)``; every entry takes counts (n, R) and a DetectionProblem."""

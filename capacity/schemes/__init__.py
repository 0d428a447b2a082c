"""Signalling schemes (alphabets of release vectors with their molecule cost and bit labels) and detectors with
simulated error rates."""

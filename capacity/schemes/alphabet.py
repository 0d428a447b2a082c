"""The alphabet type: release vectors and what each costs."""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Alphabet:
    """A signalling alphabet.

    scheme : name of the scheme that made it (``"amplitude"``, ``"spatial"``, ``"multiplex"``, ``"hybrid"``).
    symbols : shape (S, E), molecules released by each emitter at the start of the slot for each symbol.
    labels : S readable names, e.g. ``"e0:500"``.
    bits : shape (S, B) 0/1 bit labels used to count bit errors (B = ceil(log2 S)); Gray-like where it helps.
    """

    scheme: str
    symbols: np.ndarray
    labels: tuple[str, ...]
    bits: np.ndarray

    @property
    def cost(self) -> np.ndarray:
        """Molecules per symbol (all emitters together), shape (S,)."""
        return np.asarray(self.symbols, dtype=float).sum(axis=1)

    @property
    def size(self) -> int:
        return int(np.shape(self.symbols)[0])

    @property
    def emitters(self) -> int:
        return int(np.shape(self.symbols)[1])

    def named(self, names) -> "Alphabet":
        """The same alphabet with ``e<i>:`` in the labels replaced by the emitters' names (``sender-west:60``)."""
        names = tuple(names)
        if len(names) != self.emitters:
            return self
        labels = tuple(re.sub(r"\be(\d+):", lambda m: f"{names[int(m.group(1))]}:", lab) for lab in self.labels)
        return dataclasses.replace(self, labels=labels)

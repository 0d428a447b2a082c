"""The one result type every response model returns."""

from __future__ import annotations

from typing import NamedTuple

import numpy as np


class ChannelResponse(NamedTuple):
    """Hit probabilities of every emitter-receiver pair, slot by slot.

    hits : shape (E, R, L+1), dimensionless. ``hits[i, j, l]`` is the probability that one molecule released by
        emitter ``i`` at the start of slot 0 is counted by receiver ``j`` in slot ``l`` (time
        ``[l*Ts, (l+1)*Ts)``; for a passive receiver: inside the sphere at the sampling instant of slot ``l``).
    tail : shape (E, R): probability counted after the last kept lag (absorbing: eventual capture minus the
        kept sum; passive: sum of the sampled probabilities over all later slots).
    stderr : shape (E, R, L+1) standard errors for estimated models, or ``None`` for exact/deterministic ones.
    model : ``"lone"``, ``"shadowed"`` or ``"particles"``.
    slot_edges : shape (L+2,), seconds: ``[0, Ts, 2Ts, ..., (L+1)Ts]``.
    notes : human-readable remarks (validated range, chosen memory, tail tolerance), tuple of str.
    """

    hits: np.ndarray
    tail: np.ndarray
    stderr: np.ndarray | None
    model: str
    slot_edges: np.ndarray
    notes: tuple[str, ...] = ()

    @property
    def memory(self) -> int:
        """Number of lags kept, L."""
        return int(np.shape(self.hits)[-1]) - 1

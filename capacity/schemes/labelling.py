"""Bit labels for signalling alphabets, and readable symbol names.

Every alphabet of S symbols gets B = ceil(log2 S) bits per symbol (B = 1 when S = 1 is impossible: alphabets have
at least two symbols). The labels are used only to count bit errors, so the choice matters only through how many
bits a typical symbol error flips:

* along an amplitude order (neighbouring levels are the likeliest confusions on a counting channel) the binary
  reflected Gray code g(k) = k XOR (k >> 1) is used: consecutive indices differ in exactly one bit (Gray, US patent
  2,632,058, 1953; common practice in digital communications);
* for a product alphabet (every emitter sends its own level) the label is the concatenation of the per-emitter Gray
  labels, so a one-level slip on one emitter flips one bit. This needs B = E·ceil(log2 M) = ceil(log2 M^E), which
  holds exactly when the number of levels M is a power of two; for other M the concatenation would need more than
  ceil(log2 S) bits, so natural binary of the symbol index is used instead (documented in the alphabet's labels);
* natural binary of the symbol index otherwise (spatial and hybrid alphabets, whose symbols have no natural order).
"""

from __future__ import annotations

import numpy as np


def bits_per_symbol(size: int) -> int:
    """B = ceil(log2 S) for an alphabet of ``size`` >= 2 symbols (exact integer arithmetic, no float log)."""
    return max(1, (int(size) - 1).bit_length())


def to_bits(values: np.ndarray, width: int) -> np.ndarray:
    """Integers -> 0/1 rows, most significant bit first.

    values : shape (S,), non-negative integers below 2**width.  Returns shape (S, width), dtype int8.
    """
    v = np.asarray(values, dtype=np.int64)
    shifts = np.arange(width - 1, -1, -1, dtype=np.int64)
    return ((v[:, None] >> shifts[None, :]) & 1).astype(np.int8)


def gray_code(count: int) -> np.ndarray:
    """Binary reflected Gray code of 0..count-1: g(k) = k XOR (k >> 1), shape (count,), int64."""
    k = np.arange(int(count), dtype=np.int64)
    return k ^ (k >> 1)


def gray_labels(size: int) -> np.ndarray:
    """Gray labels for ``size`` symbols in amplitude order, shape (size, ceil(log2 size)), int8.

    Rows k and k+1 differ in exactly one bit for every k (also when ``size`` is not a power of two, since the
    first ``size`` words of the reflected code are used).
    """
    return to_bits(gray_code(size), bits_per_symbol(size))


def natural_labels(size: int) -> np.ndarray:
    """Natural binary labels of the indices 0..size-1, shape (size, ceil(log2 size)), int8."""
    return to_bits(np.arange(int(size)), bits_per_symbol(size))


def product_labels(levels: int, emitters: int) -> tuple[np.ndarray, str]:
    """Labels for a product alphabet whose symbol index is the mixed-radix number (d_0 d_1 ... d_{E-1}) in base
    ``levels`` with emitter 0 the most significant digit (the order :func:`itertools.product` yields).

    Returns (bits of shape (levels**emitters, B), kind) where kind is ``"gray-per-emitter"`` when ``levels`` is a
    power of two (concatenated per-emitter Gray labels, B = emitters·log2 levels = ceil(log2 S)) and
    ``"natural"`` otherwise (natural binary of the index, B = ceil(log2 S)).
    """
    size = int(levels) ** int(emitters)
    if levels & (levels - 1) == 0:
        per = gray_labels(levels)  # (M, log2 M)
        digits = np.array(np.unravel_index(np.arange(size), (levels,) * emitters)).T  # (S, E)
        bits = np.concatenate([per[digits[:, e]] for e in range(emitters)], axis=1)
        return bits.astype(np.int8), "gray-per-emitter"
    return natural_labels(size), "natural"


def symbol_name(release: np.ndarray) -> str:
    """Readable name of one release vector (molecules per emitter, shape (E,)).

    The firing emitters joined by ``+`` as ``"e<index>:<molecules>"`` (``"e0:500"``, ``"e0:250+e1:500"``);
    ``"none"`` when no emitter releases anything.
    """
    parts = [f"e{i}:{int(round(float(v)))}" for i, v in enumerate(np.asarray(release)) if v != 0]
    return "+".join(parts) if parts else "none"


def product_symbol_name(release: np.ndarray) -> str:
    """Name for a product-alphabet symbol: every emitter listed, zeros included (``"e0:0+e1:250"``)."""
    return "+".join(f"e{i}:{int(round(float(v)))}" for i, v in enumerate(np.asarray(release)))

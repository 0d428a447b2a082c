"""The compiled Newton solver behind ``blahut_arimoto`` on a 9-input Poisson link, where plain Blahut–Arimoto is
slow (~600 steps for 1e-10 bits) although every input is used.

Outside reference: a plain Blahut–Arimoto written here (Arimoto 1972; Blahut 1972) and run until its own
certificate max_x D(W_x || q) - I(p) is below 1e-11 bits (2 emitters x 2 receivers, 3 levels each).
"""

import numpy as np
import pytest

from capacity.channel.transition import poisson_transition, symbol_means
from capacity.information.blahut_arimoto import blahut_arimoto


def _channel():
    levels = np.array([0.0, 40.0, 120.0])
    symbols = np.array([[a, b] for a in levels for b in levels])
    hits = np.zeros((2, 2, 1))
    hits[:, :, 0] = [[0.12, 0.04], [0.05, 0.10]]
    return poisson_transition(np.asarray(symbol_means(hits, np.array([1.0, 0.5]), symbols)), tol=1e-13)


def _plain_ba(w, tol_bits=1e-11):
    p = np.full(w.shape[0], 1.0 / w.shape[0])
    with np.errstate(divide="ignore", invalid="ignore"):
        for _ in range(100_000):
            q = p @ w
            d = np.where(w > 0, w * np.log(w / q[None, :]), 0.0).sum(axis=1)
            info = p @ d
            if (d.max() - info) / np.log(2) <= tol_bits:
                return info / np.log(2)
            p = p * np.exp(d - d.max())
            p /= p.sum()
    raise AssertionError("plain Blahut-Arimoto did not converge")


def test_compiled_solver_agrees_with_plain_blahut_arimoto():
    t = _channel()
    w = np.asarray(t.matrix)
    w = np.concatenate([w, np.asarray(t.truncated_mass)[:, None]], axis=1)  # the overflow output, as the package
    ref = _plain_ba(w)
    res = blahut_arimoto(t, tol=1e-10)
    assert res.converged, res.message
    assert res.capacity <= ref + 1e-11 + 1e-12  # the reference is itself a lower bound within 1e-11
    assert ref <= res.capacity + res.gap + 1e-12
    assert res.capacity == pytest.approx(ref, abs=1e-10)

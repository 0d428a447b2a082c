"""Matplotlib figures (Agg backend, readable at one journal column width)."""

from __future__ import annotations

from pathlib import Path

import numpy as np


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def plot_response(response, emitter_names, receiver_names, path) -> Path:
    """Step plot of hit probability per slot for every emitter-receiver pair.

    response : ChannelResponse (hits (E,R,L+1), slot_edges (L+2,) seconds, stderr or None).
    """
    plt = _pyplot()
    hits = np.asarray(response.hits)
    edges_ms = np.asarray(response.slot_edges) * 1e3
    n_e, n_r, _ = hits.shape
    fig, axes = plt.subplots(1, n_r, figsize=(3.4 * n_r, 2.8), squeeze=False, sharey=True)
    for j in range(n_r):
        ax = axes[0, j]
        for i in range(n_e):
            ax.stairs(hits[i, j], edges_ms, label=f"from {emitter_names[i]}", linewidth=1.4)
            if response.stderr is not None:
                centres = 0.5 * (edges_ms[:-1] + edges_ms[1:])
                ax.errorbar(centres, hits[i, j], yerr=2 * np.asarray(response.stderr)[i, j], fmt="none",
                            ecolor="0.4", elinewidth=0.8)
        ax.set_title(f"receiver {receiver_names[j]}", fontsize=9)
        ax.set_xlabel("time since release (ms)")
        if j == 0:
            ax.set_ylabel("hit probability per slot")
        ax.grid(alpha=0.3)
        ax.legend(fontsize=7)
    fig.suptitle(f"channel response ({response.model} model)", fontsize=9)
    return save_figure(fig, path, dpi=150)


def plot_rate_curves(curves, path, *, per_second: bool = False) -> Path:
    """Rate-versus-budget curves, one line per scheme, bounds as a shaded band, logarithmic budget axis.

    curves : dict scheme -> dict with arrays ``budget`` (molecules/symbol), ``rate``, ``lower``, ``upper``,
        ``isi_free`` (all bits per symbol), and the float ``symbol_interval`` (s).
    """
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(3.5, 2.8))
    for name, c in curves.items():
        scale = 1.0 / c["symbol_interval"] if per_second else 1.0
        b = np.asarray(c["budget"], dtype=float)
        (line,) = ax.plot(b, np.asarray(c["rate"]) * scale, marker="o", markersize=3, label=name)
        ax.fill_between(b, np.asarray(c["lower"]) * scale, np.asarray(c["upper"]) * scale,
                        color=line.get_color(), alpha=0.18, linewidth=0)
        ax.plot(b, np.asarray(c["isi_free"]) * scale, linestyle=":", color=line.get_color(), linewidth=1)
    _log_axis(ax)
    ax.set_xlabel("mean molecules per symbol")
    ax.set_ylabel("bits per second" if per_second else "bits per symbol")
    ax.grid(alpha=0.3, which="both")
    ax.legend(fontsize=7, title="line: i.i.d. rate with ISI\nband: bounds; dotted: ISI-free", title_fontsize=6)
    return save_figure(fig, path, dpi=200)


def save_figure(fig, path, dpi: int = 200) -> Path:
    """Lay out, write (creating the folder) and close a figure; returns the path."""
    import matplotlib.pyplot as plt

    fig.tight_layout()
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=dpi)
    plt.close(fig)
    return path


def _log_axis(ax) -> None:
    """Logarithmic x axis with plain-number labels on the decades and a few readable minor labels."""
    from matplotlib.ticker import LogLocator, NullFormatter, ScalarFormatter

    ax.set_xscale("log")
    ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    ax.xaxis.set_major_formatter(ScalarFormatter())
    ax.xaxis.set_minor_formatter(NullFormatter())

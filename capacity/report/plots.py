"""Matplotlib figures (Agg backend, readable at one journal column width)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

#: the project's own colours (distinguishable in greyscale print and by the common colour-vision deficiencies:
#: dark and light alternate) and markers, used in this order
PALETTE = ("#17408b", "#e0822b", "#3a8f5c", "#b8325f", "#6b5b95", "#8c6d1f", "#1f8ca3", "#555555")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "h")


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from cycler import cycler

    plt.rcParams["axes.prop_cycle"] = cycler(color=PALETTE)
    return plt


def style(k: int) -> dict:
    """Colour and marker of the k-th series."""
    return {"color": PALETTE[k % len(PALETTE)], "marker": MARKERS[k % len(MARKERS)]}


def footer_text(name: str | None) -> str:
    """Footer of every figure: the scenario's name, the tool's version and the date of the run."""
    import datetime

    from capacity import __version__

    parts = ([name] if name else []) + [f"capacity {__version__}", datetime.date.today().isoformat()]
    return " | ".join(parts)


def plot_response(response, emitter_names, receiver_names, path, *, title: str | None = None,
                  log: bool = False) -> Path:
    """Step plot of hit probability per slot for every emitter-receiver pair (PNG, PDF or SVG by the file name).

    response : ChannelResponse (hits (E,R,L+1), slot_edges (L+2,) seconds, stderr or None).
    title : the scenario's name (title and footer). log : logarithmic probability axis (shows cross-talk).
    """
    plt = _pyplot()
    hits = np.asarray(response.hits)
    edges_ms = np.asarray(response.slot_edges) * 1e3
    n_e, n_r, _ = hits.shape
    fig, axes = plt.subplots(1, n_r, figsize=(3.4 * n_r, 2.8), squeeze=False, sharey=True)
    for j in range(n_r):
        ax = axes[0, j]
        for i in range(n_e):
            ax.stairs(hits[i, j], edges_ms, label=f"from {emitter_names[i]}", linewidth=1.4,
                      color=style(i)["color"], linestyle=("-", "--", "-.", ":")[i % 4])
            if response.stderr is not None:
                centres = 0.5 * (edges_ms[:-1] + edges_ms[1:])
                ax.errorbar(centres, hits[i, j], yerr=2 * np.asarray(response.stderr)[i, j], fmt="none",
                            ecolor="0.4", elinewidth=0.8)
        ax.set_title(f"receiver {receiver_names[j]}", fontsize=9)
        ax.set_xlabel("time since release (ms)")
        if j == 0:
            ax.set_ylabel("hit probability per slot")
        if log:
            ax.set_yscale("log")
            positive = hits[hits > 0]
            if positive.size:
                ax.set_ylim(max(positive.min(), positive.max() * 1e-6) / 2, positive.max() * 2)
        ax.grid(alpha=0.3)
        ax.legend(fontsize=7)
    fig.suptitle(f"{title + ': ' if title else ''}channel response ({response.model} model)", fontsize=9)
    return save_figure(fig, path, dpi=150, footer=title)


def plot_rate_curves(curves, path, *, per_second: bool = False, title: str | None = None) -> Path:
    """Rate-versus-budget curves, one line per scheme, bounds as a shaded band, logarithmic budget axis.

    curves : dict scheme -> dict with arrays ``budget`` (molecules/symbol), ``rate``, ``lower``, ``upper``,
        ``single_slot`` (all bits per symbol), and the float ``symbol_interval`` (s).
    """
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(5.6, 2.8))  # the legend beside the axes, off the curves
    for k, (name, c) in enumerate(curves.items()):
        scale = 1.0 / c["symbol_interval"] if per_second else 1.0
        b = np.asarray(c["budget"], dtype=float)
        st = style(k)
        ax.plot(b, np.asarray(c["rate"]) * scale, markersize=3.5, label=name, **st)
        ax.fill_between(b, np.asarray(c["lower"]) * scale, np.asarray(c["upper"]) * scale,
                        color=st["color"], alpha=0.18, linewidth=0)
        # the single-slot capacity is not a ceiling (it ignores later arrivals): hollow markers, no line
        ax.plot(b, np.asarray(c["single_slot"]) * scale, linestyle="none", marker=st["marker"], markersize=3.5,
                markerfacecolor="none", markeredgecolor=st["color"], markeredgewidth=0.7)
    _log_axis(ax)
    ax.set_xlabel("budget (mean molecules per symbol)")
    ax.set_ylabel("bits per second" if per_second else "bits per symbol")
    ax.grid(alpha=0.3, which="both")
    ax.legend(fontsize=7, loc="center left", bbox_to_anchor=(1.02, 0.5), title_fontsize=5.5,
              title="filled: rate with ISI\nband: its bounds\nhollow: single-slot capacity\n(later arrivals ignored)")
    if title:
        ax.set_title(title, fontsize=8)
    return save_figure(fig, path, dpi=200, footer=title)


def save_figure(fig, path, dpi: int = 200, footer: str | None = None) -> Path:
    """Lay out, add the footer (:func:`footer_text` of ``footer``, the scenario's name), write (PNG, PDF or SVG by
    the file name, creating the folder) and close a figure; returns the path."""
    import matplotlib.pyplot as plt

    fig.tight_layout(rect=(0, 0.04, 1, 1))
    fig.text(0.995, 0.005, footer_text(footer), fontsize=5.5, color="0.45", ha="right", va="bottom")
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

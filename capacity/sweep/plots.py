"""Default plots of a sweep: one axis -> lines with their bracket as a band; two axes -> a heat map of the first
figure of merit with its best point marked. Larger grids get no default plot (the dataset has them all)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from capacity.sweep.results import DISPLAY


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _axis_values(ax):
    """(positions, tick labels or None, axis title) of a grid axis for plotting."""
    kind = ax.field.kind
    if ax.numeric:
        factor, unit = DISPLAY.get(kind, (1.0, {"count": "molecules"}.get(kind, "")))
        values = np.asarray([float(v) for v in ax.values]) * factor
        return values, None, f"{ax.field.path}" + (f" ({unit})" if unit else "")
    return np.arange(len(ax.values)), [str(ax.coordinate(v)) for v in ax.values], ax.field.path


def line_plot(ds, spec, panels, path) -> Path:
    plt = _pyplot()
    ax0 = spec.axes[0]
    x, ticks, title = _axis_values(ax0)
    fig, axs = plt.subplots(1, len(panels), figsize=(3.6 * len(panels), 2.9), squeeze=False)
    for ax, (ylabel, curves) in zip(axs[0], panels, strict=True):
        for output, lower, upper, legend in curves:
            if output not in ds:
                continue
            y = np.asarray(ds[output].values, dtype=float)
            line = ax.plot(x, y, marker="o", markersize=3, label=legend)[0]
            if lower in ds and upper in ds:
                ax.fill_between(x, np.asarray(ds[lower].values, dtype=float), np.asarray(ds[upper].values,
                                dtype=float), color=line.get_color(), alpha=0.2, linewidth=0)
        if ax0.spacing == "log":
            ax.set_xscale("log")
        if ticks is not None:
            ax.set_xticks(x, ticks, rotation=30, fontsize=7)
        ax.set_xlabel(title)
        ax.set_ylabel(ylabel)
        ax.grid(alpha=0.3, which="both")
    axs[0][0].legend(fontsize=7, title="band: bracket [lower, upper]" if any(
        c[1] for _, cs in panels for c in cs) else None, title_fontsize=6)
    return _save(fig, path)


def heat_map(ds, spec, output: str, path) -> Path:
    plt = _pyplot()
    ay, ax_ = spec.axes[0], spec.axes[1]
    z = np.asarray(ds[output].values, dtype=float)
    fig, ax = plt.subplots(figsize=(4.8, 3.8))
    mesh = ax.pcolormesh(np.arange(z.shape[1] + 1) - 0.5, np.arange(z.shape[0] + 1) - 0.5, z, cmap="viridis",
                         shading="flat")
    cbar = fig.colorbar(mesh, ax=ax)
    unit = ds[output].attrs.get("units", "")
    cbar.set_label(output.replace("_", " ") + (f" ({unit})" if unit else ""))
    for grid_ax, setter in ((ay, ax.set_yticks), (ax_, ax.set_xticks)):
        vals, ticks, _ = _axis_values(grid_ax)
        labels = ticks if ticks is not None else [f"{v:.3g}" for v in vals]
        setter(np.arange(len(labels)), labels, fontsize=7)
    ax.set_ylabel(_axis_values(ay)[2])
    ax.set_xlabel(_axis_values(ax_)[2])
    if np.any(np.isfinite(z)):
        from matplotlib.patches import Rectangle

        i, j = np.unravel_index(np.nanargmax(z), z.shape)
        ax.add_patch(Rectangle((j - 0.5, i - 0.5), 1, 1, fill=False, edgecolor="red", linewidth=2.5))
        ax.plot(j - 0.32, i + 0.3, marker="*", markersize=11, color="red", markeredgecolor="white",
                linestyle="none", label="best")
        ax.legend(fontsize=7, loc="upper right", framealpha=0.8)
        if z.size <= 144:
            lo, hi = np.nanmin(z), np.nanmax(z)
            for (a, b), v in np.ndenumerate(z):
                if np.isfinite(v):
                    bright = hi > lo and (v - lo) / (hi - lo) > 0.6  # viridis is light at the top
                    ax.text(b, a, f"{v:.3g}", ha="center", va="center", fontsize=7,
                            color="black" if bright else "white")
    ax.set_title(f"{spec.measure}: {output.replace('_', ' ')}", fontsize=9)
    return _save(fig, path)


def _save(fig, path) -> Path:
    plt = _pyplot()
    path = Path(path)
    fig.tight_layout()
    fig.savefig(path, dpi=150)
    plt.close(fig)
    return path


def default_plots(ds, spec, measure, outputs, folder) -> list[Path]:
    """Write the default plots for a 1- or 2-axis sweep into ``folder``; returns their paths."""
    folder = Path(folder)
    if len(spec.axes) == 1:
        return [line_plot(ds, spec, measure.panels(outputs), folder / "sweep.png")]
    if len(spec.axes) == 2:
        merits = measure.merits(outputs)
        return [heat_map(ds, spec, m, folder / f"sweep_{m}.png") for m in merits[:2]]
    return []

"""Static pictures for reports (PNG bytes), drawn with matplotlib's Agg backend.

The colours follow the house look: vermillion for contributions that raise the score, bluish
green for those that lower it; cividis for sequential values.
"""

from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

RAISES = "#D55E00"
LOWERS = "#009E73"
INK = "#222222"
SEQUENTIAL = "cividis"


def _png(fig) -> bytes:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, bbox_inches="tight")
    plt.close(fig)
    return buf.getvalue()


def contribution_bars(features, contributions, *, base_value: float, output: float, units: str,
                      cutoff: float | None = None, title: str = "Contributions to this case's score",
                      top: int = 12) -> bytes:
    """Horizontal signed bars, largest first, with the base value and the case's output noted."""
    c = np.asarray(contributions, dtype=float)
    order = np.argsort(-np.abs(c))[:top][::-1]
    names = [str(features[i]) for i in order]
    vals = c[order]
    fig, ax = plt.subplots(figsize=(7, 0.35 * len(order) + 1.4))
    ax.barh(names, vals, color=[RAISES if v > 0 else LOWERS for v in vals])
    ax.axvline(0, color=INK, lw=0.8)
    ax.set_xlabel(f"contribution ({units})")
    subtitle = f"base value {base_value:.3g}  →  this case {output:.3g}"
    if cutoff is not None:
        subtitle += f"  (cutoff {cutoff:.3g})"
    ax.set_title(f"{title}\n{subtitle}", fontsize=10)
    ax.spines[["top", "right"]].set_visible(False)
    return _png(fig)


def ranked_bars(labels, values, *, errors=None, xlabel: str, title: str, top: int = 15) -> bytes:
    v = np.asarray(values, dtype=float)
    order = np.argsort(-v)[:top][::-1]
    fig, ax = plt.subplots(figsize=(7, 0.32 * len(order) + 1.2))
    ax.barh([str(labels[i]) for i in order], v[order], color="#3B6FB6",
            xerr=None if errors is None else np.asarray(errors, dtype=float)[order], ecolor=INK)
    ax.set_xlabel(xlabel)
    ax.set_title(title, fontsize=10)
    ax.spines[["top", "right"]].set_visible(False)
    return _png(fig)


def curves(x, series: dict, *, xlabel: str, ylabel: str, title: str, categorical: bool = False) -> bytes:
    """Several named curves over one x axis (effect curves, overlays)."""
    fig, ax = plt.subplots(figsize=(6, 3.4))
    xs = np.arange(len(x)) if categorical else np.asarray(x, dtype=float)
    palette = ["#3B6FB6", "#D55E00", "#009E73", "#7A5195"]
    for k, (name, y) in enumerate(series.items()):
        ax.plot(xs, np.asarray(y, dtype=float), marker="o" if categorical else None, ms=3,
                color=palette[k % len(palette)], label=str(name))
    if categorical:
        ax.set_xticks(xs, [str(v) for v in x], rotation=30, ha="right")
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.set_title(title, fontsize=10)
    if len(series) > 1:
        ax.legend(frameon=False, fontsize=8)
    ax.spines[["top", "right"]].set_visible(False)
    return _png(fig)


def matrix(labels, values, *, title: str, signed: bool = False, colorbar_label: str = "") -> bytes:
    m = np.asarray(values, dtype=float)
    fig, ax = plt.subplots(figsize=(0.38 * len(labels) + 2.5, 0.38 * len(labels) + 1.8))
    if signed:
        lim = np.nanmax(np.abs(m)) or 1.0
        im = ax.imshow(m, cmap="PuOr", vmin=-lim, vmax=lim)
    else:
        im = ax.imshow(m, cmap=SEQUENTIAL, vmin=0)
    ax.set_xticks(range(len(labels)), [str(s) for s in labels], rotation=60, ha="right", fontsize=7)
    ax.set_yticks(range(len(labels)), [str(s) for s in labels], fontsize=7)
    ax.set_title(title, fontsize=10)
    fig.colorbar(im, ax=ax, fraction=0.046, label=colorbar_label)
    return _png(fig)

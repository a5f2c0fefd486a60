"""Report figures drawn with matplotlib on its headless Agg canvas.

* :func:`plane_figure` -- the vowel plane in the phonetic orientation
  (F2 increasing to the left along the top, F1 increasing downwards on the
  right, as vowel charts are drawn: common practice), the target regions at
  the session's hit size, and every attempt placed at its steady-part
  median (F1, F2).
* :func:`trend_figure` -- accuracy per target across sessions.

Colours are the colour-blind-safe palette of Okabe & Ito (2008), "Color
Universal Design (CUD): how to make figures and presentations that are
friendly to colorblind people" (the same constants as the practice screen,
:data:`livevowel.ui.theme.OKABE_ITO`). Hits and misses differ in shape as
well as colour (filled circle vs cross), so the plane reads in grey print
and for every kind of colour vision; attempts not counted (flagged,
excluded or made without a prompt) are hollow diamonds.
"""

from __future__ import annotations

import io
import math
from typing import Any, Mapping, Sequence

import numpy as np

from livevowel.ui.theme import OKABE_ITO


def _hex(name: str) -> str:
    r, g, b = OKABE_ITO[name]
    return f"#{r:02X}{g:02X}{b:02X}"


#: Jobs of the palette hues in the figures (hex colours).
COLOURS: dict[str, str] = {
    "hit": _hex("bluish_green"),        # #009E73
    "miss": _hex("vermillion"),         # #D55E00
    "target": _hex("blue"),             # #0072B2, targets that were prompted
    "other": "#8A8A8F",                 # targets of the set not prompted
    "unjudged": "#5F5F64",
    "ink": "#2B2B2B",
    "muted": "#6B6B6B",
    "grid": "#E4E2DC",
    "paper": "#FFFFFF",
}

#: Line colours and markers for targets in the trend figure (palette order; markers differ too).
SERIES: tuple[tuple[str, str], ...] = (
    (_hex("blue"), "o"), (_hex("vermillion"), "s"), (_hex("bluish_green"), "^"),
    (_hex("reddish_purple"), "D"), (_hex("orange"), "v"), (_hex("sky_blue"), "P"),
    ("#000000", "X"), (_hex("yellow"), "*"),
)

#: Markers of the plane: what they mean (also used in the report's legend text).
MARKERS = {"hit": "filled circle", "miss": "cross", "unjudged": "hollow diamond"}


def _mpl():
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    plt.rcParams.update({
        "font.family": "DejaVu Sans",
        "font.size": 9.5,
        "axes.edgecolor": COLOURS["muted"],
        "axes.labelcolor": COLOURS["ink"],
        "xtick.color": COLOURS["muted"],
        "ytick.color": COLOURS["muted"],
        "svg.fonttype": "none",
    })
    return plt


def figure_png(fig, *, dpi: int = 150) -> bytes:
    """The figure as PNG bytes (the figure is closed afterwards)."""
    plt = _mpl()
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, facecolor=COLOURS["paper"], metadata={"Software": None})
    plt.close(fig)
    return buf.getvalue()


def _finite(v) -> bool:
    return v is not None and isinstance(v, (int, float)) and math.isfinite(v)


def _result(row: Mapping) -> int | None:
    from livevowel.report.data import is_trial, result_of

    return result_of(row) if is_trial(row) else None


def plane_figure(rows: Sequence[Mapping], target_set=None, *, title: str = "",
                 hit_sizes: Mapping[str, float] | None = None, width_in: float = 7.0, height_in: float = 5.6):
    """The vowel plane with the target regions and every attempt.

    Parameters
    ----------
    rows : sequence of mappings
        Attempt rows (``f1_hz``, ``f2_hz`` in Hz, ``target_id``, judgement columns).
    target_set : TargetSet, optional
        Regions to draw; ``None`` draws the attempts only.
    title : str, keyword-only
    hit_sizes : mapping, optional, keyword-only
        Target id -> hit size in SD units to draw its region at (default the
        size used in its trials, else the target's own).
    width_in, height_in : float, keyword-only
        Figure size, inches.

    Returns
    -------
    matplotlib.figure.Figure
    """
    plt = _mpl()
    fig, ax = plt.subplots(figsize=(width_in, height_in), layout="constrained")
    prompted = {str(r["target_id"]) for r in rows if r.get("target_id")}
    sizes = dict(hit_sizes or {})
    for r in rows:
        tid = r.get("target_id")
        if tid and tid not in sizes and _finite(r.get("hit_size_sd")):
            sizes[str(tid)] = float(r["hit_size_sd"])
    xs: list[float] = []
    ys: list[float] = []
    if target_set is not None:
        for t in target_set.targets:
            on = t.id in prompted
            out = t.outline_hz(96, size_sd=sizes.get(t.id))
            f1, f2 = out[:, 0], out[:, 1]
            xs += list(f2)
            ys += list(f1)
            colour = COLOURS["target"] if on else COLOURS["other"]
            ax.fill(f2, f1, color=colour, alpha=0.10 if on else 0.04, lw=0, zorder=1)
            ax.plot(np.append(f2, f2[0]), np.append(f1, f1[0]), color=colour, lw=1.4 if on else 0.8,
                    ls="-" if on else (0, (3, 2)), zorder=2)
            # the label sits on the region's upper edge, so attempts at the centre never hide it
            label = t.ipa or t.id
            if on and t.lexical_set:
                label = f"{label} {t.lexical_set.upper()}"
            top = int(np.argmin(f1))
            ax.annotate(label, (f2[top], f1[top]), xytext=(0, 1.5), textcoords="offset points", ha="center",
                        va="bottom", fontsize=9.5 if on else 8.5, color=colour, zorder=3,
                        fontweight="bold" if on else "normal")
            ys.append(float(f1[top]) - 0.06 * float(t.f1_hz))
    groups: dict[str, tuple[list[float], list[float]]] = {"hit": ([], []), "miss": ([], []), "unjudged": ([], [])}
    for r in rows:
        if not (_finite(r.get("f1_hz")) and _finite(r.get("f2_hz"))):
            continue
        res = _result(r)
        key = "unjudged" if res is None else ("hit" if res else "miss")
        groups[key][0].append(float(r["f2_hz"]))
        groups[key][1].append(float(r["f1_hz"]))
        if key == "miss" and target_set is not None and r.get("target_id"):
            t = target_set.find(str(r["target_id"]))
            if t is not None:   # a faint line from the miss to the target it aimed at
                ax.plot([float(r["f2_hz"]), t.f2_hz], [float(r["f1_hz"]), t.f1_hz], color=COLOURS["miss"],
                        lw=0.8, alpha=0.45, ls=(0, (1, 2)), zorder=3.5)
    n = {k: len(v[0]) for k, v in groups.items()}
    # Sizes nest so that marks at the same place all stay visible: the hollow
    # diamond (not counted) outermost, the hit disc inside it, the thin miss
    # cross on top, its arms shorter than the disc is wide.
    ax.scatter(*groups["unjudged"], s=150, marker="D", facecolors="none", edgecolors=COLOURS["unjudged"],
               linewidths=1.1, zorder=4, label=f"not counted ({n['unjudged']})")
    ax.scatter(*groups["hit"], s=90, marker="o", color=COLOURS["hit"], edgecolors="white", linewidths=0.7,
               zorder=5, label=f"hit ({n['hit']})")
    ax.scatter(*groups["miss"], s=40, marker="x", color=COLOURS["miss"], linewidths=1.6, zorder=6,
               label=f"miss ({n['miss']})")
    for k in groups:
        xs += groups[k][0]
        ys += groups[k][1]
    if xs:
        x0, x1 = min(xs), max(xs)
        y0, y1 = min(ys), max(ys)
    else:
        x0, x1, y0, y1 = 700.0, 2600.0, 250.0, 900.0
    padx, pady = 0.06 * (x1 - x0) + 40, 0.08 * (y1 - y0) + 20
    # phonetic orientation: F2 grows to the left, F1 grows downwards
    ax.set_xlim(x1 + padx, max(0.0, x0 - padx))
    ax.set_ylim(y1 + pady, max(0.0, y0 - pady))
    ax.xaxis.tick_top()
    ax.xaxis.set_label_position("top")
    ax.yaxis.tick_right()
    ax.yaxis.set_label_position("right")
    ax.set_xlabel("F2 (Hz)  \u2190 higher", color=COLOURS["ink"])
    ax.set_ylabel("F1 (Hz)  \u2193 higher", color=COLOURS["ink"])
    ax.grid(True, color=COLOURS["grid"], lw=0.7, zorder=0)
    ax.set_axisbelow(True)
    for side in ("left", "bottom"):
        ax.spines[side].set_visible(False)
    ax.legend(loc="lower left", frameon=True, framealpha=0.92, edgecolor=COLOURS["grid"], fontsize=8.5,
              borderpad=0.6, handletextpad=0.4)
    if title:
        ax.set_title(title, loc="left", fontsize=10.5, color=COLOURS["ink"], pad=10)
    return fig


def trend_figure(series: Mapping[Any, Sequence], *, labels: Mapping[str, str] | None = None, title: str = "",
                 width_in: float = 7.0, height_in: float = 3.6):
    """Accuracy per target across sessions.

    Parameters
    ----------
    series : mapping
        Series key (e.g. the ``(target id, set)`` keys of
        :func:`livevowel.report.data.trend`) -> sequence of
        :class:`~livevowel.report.data.TrendPoint` (``session_id``,
        ``started_utc``, ``trials``, ``hits``).
    labels : mapping, optional, keyword-only
        Series key -> label (e.g. IPA symbol and lexical set; default: the key).
    title : str, keyword-only

    Returns
    -------
    matplotlib.figure.Figure
        x: sessions in time order (number and date), y: accuracy 0-100 %.
    """
    plt = _mpl()
    fig, ax = plt.subplots(figsize=(width_in, height_in), layout="constrained")
    sessions = sorted({(p.started_utc, p.session_id) for pts in series.values() for p in pts})
    pos = {sid: i for i, (_, sid) in enumerate(sessions)}
    m = len(series)
    for k, (tid, pts) in enumerate(series.items()):
        colour, marker = SERIES[k % len(SERIES)]
        dodge = 0.07 * (k - (m - 1) / 2) if m > 1 else 0.0   # equal values side by side, not hidden
        x = [pos[p.session_id] + dodge for p in pts]
        y = [100.0 * p.accuracy for p in pts]
        lab = (labels or {}).get(tid, tid if isinstance(tid, str) else " ".join(str(v) for v in tid if v))
        ax.plot(x, y, color=colour, lw=1.6, marker=marker, ms=6.5, mec="white", mew=0.7, label=lab, zorder=3)
    ax.set_ylim(-4, 104)
    ax.set_yticks([0, 25, 50, 75, 100])
    ax.set_yticklabels(["0 %", "25 %", "50 %", "75 %", "100 %"])
    step = max(1, math.ceil(len(sessions) / 8))       # at most 8 labels (dates), however long the history
    ticks = list(range(0, len(sessions), step))
    ax.set_xticks(ticks)
    ax.set_xticklabels([f"#{sessions[i][1]}\n{sessions[i][0][:10]}" for i in ticks], fontsize=7.5)
    ax.set_xlim(-0.5, max(0.5, len(sessions) - 0.5))
    ax.set_ylabel("accuracy (hits / trials)")
    ax.set_xlabel("session (number, date UTC)")
    ax.grid(True, axis="y", color=COLOURS["grid"], lw=0.7, zorder=0)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    if series:
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, fontsize=8.5, borderaxespad=0)
    else:
        ax.text(0.5, 0.5, "no trials in these sessions", transform=ax.transAxes, ha="center", va="center",
                color=COLOURS["muted"])
    if title:
        ax.set_title(title, loc="left", fontsize=10.5, color=COLOURS["ink"])
    return fig

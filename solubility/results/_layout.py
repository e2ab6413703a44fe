"""Figure layout helpers: matplotlib set-up, readable ticks at any range, labels placed clear of data.

Nothing here knows about solvus lines; `solubility.results.plotting` draws them with these helpers.
"""

from __future__ import annotations

import math
import os

import numpy as np

__all__ = ["free_boxes", "place_text", "pyplot", "readable_ticks"]


def pyplot():
    """`matplotlib.pyplot` with a non-interactive backend unless one was chosen, and a usable config folder.

    When the default config folder cannot be written (an unwritable HOME, as for a service account),
    ``MPLCONFIGDIR`` is pointed at a fresh temporary folder first, so matplotlib neither fails nor warns.
    """
    import sys

    from solubility.results._mplconfig import ensure_config_dir

    if "matplotlib" not in sys.modules:
        ensure_config_dir()
    import matplotlib

    if "matplotlib.pyplot" not in sys.modules and not os.environ.get("MPLBACKEND"):
        matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


# ---------------------------------------------------------------------------------------------------- ticks
def _plain(v: float, _pos=None) -> str:
    """A tick label: plain decimals between 1e-4 and 1e5, otherwise m x 10^k."""
    if v == 0:
        return "0"
    if 1e-4 <= abs(v) < 1e5:
        return f"{v:.6g}"
    exp = math.floor(math.log10(abs(v)))
    mant = v / 10**exp
    if abs(round(mant, 6) - 1) < 1e-9:
        return rf"$10^{{{exp}}}$"
    return rf"${mant:.3g}\times10^{{{exp}}}$"


def _overlap(labels) -> bool:
    boxes = [t.get_window_extent() for t in labels if t.get_visible() and t.get_text()]
    return any(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1:])


def _tick_labels(ax, which: str):
    axis = ax.xaxis if which == "x" else ax.yaxis
    lo, hi = sorted(ax.get_xlim() if which == "x" else ax.get_ylim())
    ticks = [t for t in axis.get_major_ticks() if lo <= t.get_loc() <= hi]
    return [t.label1 for t in ticks]


def readable_ticks(ax, which: str = "x", nbins: int = 6) -> None:
    """Major ticks on one axis whose labels never run into each other, for a linear or log axis of any span.

    A linear axis gets at most `nbins` ticks with plain decimals (an offset factor for very small or large
    numbers); a log axis spanning less than about a decade gets plain linear-style ticks, up to three decades
    1-2-5 ticks, more decades powers of ten. Fewer ticks are used until no two labels overlap.
    """
    from matplotlib import ticker

    axis = ax.xaxis if which == "x" else ax.yaxis
    log = axis.get_scale() == "log"
    lo, hi = sorted(ax.get_xlim() if which == "x" else ax.get_ylim())
    for n in range(nbins, 1, -1):
        if not log:
            axis.set_major_locator(ticker.MaxNLocator(nbins=n, steps=[1, 2, 2.5, 5, 10]))
            fmt = ticker.ScalarFormatter(useMathText=True)
            fmt.set_powerlimits((-4, 5))
            fmt.set_useOffset(False)
            axis.set_major_formatter(fmt)
        else:
            decades = math.log10(hi / lo) if lo > 0 else 10.0
            if decades < 1.2:
                values = ticker.MaxNLocator(nbins=n, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi)
                axis.set_major_locator(ticker.FixedLocator([v for v in values if lo <= v <= hi]))
            elif decades < 3.2:
                subs = (1.0, 2.0, 5.0) if n >= 5 else (1.0,)
                axis.set_major_locator(ticker.LogLocator(base=10, subs=subs))
            else:
                axis.set_major_locator(ticker.LogLocator(base=10, numticks=max(n, 2)))
            axis.set_major_formatter(ticker.FuncFormatter(_plain) if decades < 3.2
                                     else ticker.LogFormatterSciNotation())
            axis.set_minor_formatter(ticker.NullFormatter())
        ax.figure.draw_without_rendering()
        if not _overlap(_tick_labels(ax, which)):
            return


# ---------------------------------------------------------------------------------------------------- labels
def data_points(ax, samples: int = 12) -> np.ndarray:
    """Display coordinates of every drawn data point of `ax`, with points interpolated along each line."""
    out = []
    for line in ax.get_lines():
        if not line.get_visible() or line.get_gid() == "guide":
            continue
        xy = line.get_xydata()
        if xy.size == 0:
            continue
        disp = ax.transData.transform(xy)
        disp = disp[np.all(np.isfinite(disp), axis=1)]
        if line.get_linestyle() not in ("None", "", " ") and len(disp) > 1:
            t = np.linspace(0.0, 1.0, samples, endpoint=False)
            seg = disp[:-1, None, :] + (disp[1:] - disp[:-1])[:, None, :] * t[None, :, None]
            disp = np.vstack([seg.reshape(-1, 2), disp[-1:]])
        out.append(disp)
    for coll in ax.collections:
        offsets = coll.get_offsets()
        if len(offsets):
            out.append(ax.transData.transform(offsets))
    return np.vstack(out) if out else np.empty((0, 2))


def _hits(box, points: np.ndarray, pad: float) -> int:
    if points.size == 0:
        return 0
    inside = ((points[:, 0] >= box.x0 - pad) & (points[:, 0] <= box.x1 + pad)
              & (points[:, 1] >= box.y0 - pad) & (points[:, 1] <= box.y1 + pad))
    return int(inside.sum())


def _inside(box, outer, pad: float = 1.0) -> bool:
    return (box.x0 >= outer.x0 - pad and box.x1 <= outer.x1 + pad and box.y0 >= outer.y0 - pad
            and box.y1 <= outer.y1 + pad)


def free_boxes(ax, boxes, obstacles=(), pad: float = 4.0) -> list[int]:
    """Indices of the display-space `boxes` (Bbox) that lie inside `ax` and touch no data and no obstacle."""
    points = data_points(ax)
    frame = ax.get_window_extent()
    return [i for i, b in enumerate(boxes)
            if _inside(b, frame) and _hits(b, points, pad) == 0 and not any(b.overlaps(o) for o in obstacles)]


#: candidate anchors in axes fraction: (x, y, horizontal alignment, vertical alignment)
CORNERS = [(0.03, 0.97, "left", "top"), (0.97, 0.97, "right", "top"), (0.97, 0.03, "right", "bottom"),
           (0.03, 0.03, "left", "bottom"), (0.5, 0.97, "center", "top"), (0.5, 0.03, "center", "bottom"),
           (0.03, 0.5, "left", "center"), (0.97, 0.5, "right", "center"), (0.03, 0.72, "left", "center"),
           (0.97, 0.72, "right", "center"), (0.03, 0.28, "left", "center"), (0.97, 0.28, "right", "center"),
           (0.5, 0.72, "center", "center"), (0.5, 0.28, "center", "center"), (0.5, 0.5, "center", "center")]


#: further anchors on a 5 x 5 grid, for labels that point at a data point
GRID = [(x, y, "left" if x < 0.4 else ("right" if x > 0.6 else "center"), "center")
        for x in (0.03, 0.25, 0.5, 0.75, 0.97) for y in (0.12, 0.3, 0.5, 0.7, 0.88)]


def place_text(ax, text: str, *, xy=None, anchors=None, obstacles: list | None = None, **kwargs):
    """Put `text` at the first anchor where it lies inside the axes and clear of data and `obstacles`.

    Parameters
    ----------
    ax
        Matplotlib axes, with its data drawn.
    text
        The label.
    xy
        Data point the label points at with an arrow (None: no arrow).
    anchors
        Candidate (x, y, ha, va) in axes fraction; default `CORNERS`.
    obstacles
        Display-space Bboxes to avoid (legends, insets, other labels); the new label's box is appended.

    Returns
    -------
    matplotlib.text.Annotation
        The label, at the candidate with the fewest conflicts when no candidate is free.
    """
    obstacles = obstacles if obstacles is not None else []
    renderer = ax.figure.canvas.get_renderer()
    points = data_points(ax)
    frame = ax.get_window_extent()
    arrow = {"arrowstyle": "->", "color": "0.3", "lw": 0.7, "shrinkB": 3} if xy is not None else None
    best, best_score = None, None
    candidates = list(anchors or CORNERS + GRID)
    if xy is not None and anchors is None:  # nearest free place first, so the arrow stays short
        fxy = ax.transAxes.inverted().transform(ax.transData.transform(xy))
        candidates.sort(key=lambda a: math.hypot(a[0] - fxy[0], a[1] - fxy[1]))
    for fx, fy, ha, va in candidates:
        ann = ax.annotate(text, xy=xy if xy is not None else (fx, fy), xytext=(fx, fy),
                          xycoords="data" if xy is not None else "axes fraction", textcoords="axes fraction",
                          ha=ha, va=va, arrowprops=arrow, annotation_clip=False, **kwargs)
        box = text_box(ann, renderer)
        score = (0 if _inside(box, frame) else 1000) + _hits(box, points, 5.0) + \
            100 * sum(box.overlaps(o) for o in obstacles)
        if best_score is None or score < best_score:
            if best is not None:
                best.remove()
            best, best_score = ann, score
        else:
            ann.remove()
        if score == 0:
            break
    obstacles.append(text_box(best, renderer))
    return best


def text_box(text, renderer=None):
    """Display extent of a text or annotation: its characters and its frame, without any arrow."""
    from matplotlib.text import Text
    from matplotlib.transforms import Bbox

    renderer = renderer or text.figure.canvas.get_renderer()
    if hasattr(text, "update_positions"):  # an Annotation places its text only when asked
        text.update_positions(renderer)
    boxes = [Text.get_window_extent(text, renderer)]
    patch = text.get_bbox_patch()
    if patch is not None:
        text.update_bbox_position_size(renderer)
        boxes.append(patch.get_window_extent(renderer))
    return Bbox.union(boxes)

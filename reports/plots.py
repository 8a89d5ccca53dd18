"""The load–displacement plot of one specimen, with the secant construction.

What is drawn: the record against the origin-corrected displacement
v − v₀, the fitted initial line P = k v (the load band used for the fit
drawn heavier), the secant P = 0.95 k v, and the points P_5, P_Q and P_max.
Points that fall on the same spot (P_Q = P_5 on a Type I record, P_Q = P_max
on Type III) get one label; every label is placed where it covers neither
the record, the lines, the markers nor another label.

The construction itself is not redone here: every number comes from the
:class:`~reduce.models.Result` (ASTM E399 clause 9.1.1).  matplotlib is
imported inside the functions, with the Agg canvas only (no pyplot, no
display), so importing this module is cheap and safe on a server.
"""

from __future__ import annotations

import io
import math
import textwrap
from pathlib import Path

import numpy as np

from reduce.atomic import atomic_path

#: A4 body width is about 174 mm; the figure is drawn for that width
FIGURE_SIZE_IN = (6.7, 4.3)
_FONT_PT = 9
_MAX_PLOTTED = 4000
_COLOURS = {"record": "#222222", "initial": "#1f5fa8", "secant": "#c0561b", "points": "#7a1f5c"}
#: label offsets tried, in points from the marker: (dx, dy, horizontal alignment)
_OFFSETS = [(r * math.cos(math.radians(t)), r * math.sin(math.radians(t)),
             "center" if abs(math.cos(math.radians(t))) < 0.3 else
             "left" if math.cos(math.radians(t)) > 0 else "right")
            for r in (26, 42, 64) for t in range(0, 360, 15)]


def _decimate(v, P):
    step = max(1, int(math.ceil(v.size / _MAX_PLOTTED)))
    if step == 1:
        return v, P
    idx = np.unique(np.concatenate([np.arange(0, v.size, step), [int(np.argmax(P)), v.size - 1]]))
    return v[idx], P[idx]


def _points(result):
    """[(names, v, P)] of the construction points, coincident ones merged by value."""
    pts = []
    if result.P_5_kN is not None and result.v_5_mm is not None:
        pts.append(("P_5", result.v_5_mm, result.P_5_kN))
    if result.P_Q_kN is not None and result.v_Q_mm is not None:
        pts.append(("P_Q", result.v_Q_mm, result.P_Q_kN))
    if result.P_max_kN is not None and result.v_max_mm is not None:
        pts.append(("P_max", result.v_max_mm, result.P_max_kN))
    return pts


def _merge_close(pts, to_display, px=6.0):
    """Group points closer than ``px`` pixels on the figure."""
    groups = []
    for name, v, P in pts:
        xy = to_display((v, P))
        for g in groups:
            if np.hypot(*(g["xy"] - xy)) < px:
                g["names"].append(name)
                break
        else:
            groups.append({"names": [name], "v": v, "P": P, "xy": xy})
    return groups


def _label_text(names, P):
    order = {"P_Q": 0, "P_5": 1, "P_max": 2}
    tex = {"P_5": "$P_5$", "P_Q": "$P_Q$", "P_max": r"$P_\mathrm{max}$"}
    names = sorted(names, key=order.get)
    return " = ".join(tex[n] for n in names) + f" = {P:.2f} kN"


def _covers(box, xy) -> bool:
    """Does the display-space box cover any of the points xy (n, 2)?"""
    x, y = xy[:, 0], xy[:, 1]
    return bool(np.any((x >= box.x0) & (x <= box.x1) & (y >= box.y0) & (y <= box.y1)))


def _annotate(ax, g, dx, dy, ha):
    return ax.annotate(
        _label_text(g["names"], g["P"]), (g["v"], g["P"]), xytext=(dx, dy),
        textcoords="offset points", fontsize=_FONT_PT, ha=ha,
        va="center", color=_COLOURS["points"], zorder=7,
        bbox=dict(boxstyle="round,pad=0.25", fc="white", ec=_COLOURS["points"], lw=0.6),
        arrowprops=dict(arrowstyle="-", color=_COLOURS["points"], lw=0.7, shrinkA=0, shrinkB=4))


def _leader(xy, box, n=24):
    """Points along the leader from the marker to the label box's centre, display space."""
    t = np.linspace(0.0, 1.0, n)[:, None]
    c = np.array([(box.x0 + box.x1) / 2, (box.y0 + box.y1) / 2])
    return xy + t * (c - xy)


def _near(points, xy, px) -> int:
    """How many of xy lie within px pixels of any of the points."""
    if not points.size or not xy.size:
        return 0
    d = np.abs(points[:, None, :] - xy[None, :, :]).max(axis=2)
    return int(np.count_nonzero(d.min(axis=0) < px))


def _place_labels(fig, ax, groups, obstacles_px):
    """Annotate each group where its label is clear of everything.

    Hard rules for a position: the label lies inside the axes, covers no
    other label, no record sample, line or marker, and its leader runs
    through no other label.  Among those, the leader crossing the fewest
    record and line samples, weighed against its length, wins.  The highest point is
    labelled first (it has most room above it).  On a crowded plot a label
    that cannot be kept off the record is still kept off the other labels.
    """
    from matplotlib.text import Text

    renderer = fig.canvas.get_renderer()
    axes_box = ax.get_window_extent(renderer)
    markers = np.array([g["xy"] for g in groups])
    taken, leaders = [], []
    for g in sorted(groups, key=lambda g: -g["P"]):
        others = np.array([m for m in markers if np.hypot(*(m - g["xy"])) > 1.0]).reshape(-1, 2)
        best = None
        for dx, dy, ha in _OFFSETS:
            ann = _annotate(ax, g, dx, dy, ha)
            ann.update_positions(renderer)
            # the text alone: the annotation's own extent includes the arrow to the marker
            box = Text.get_window_extent(ann, renderer).padded(5)
            ann.remove()
            inside = (box.x0 >= axes_box.x0 and box.x1 <= axes_box.x1
                      and box.y0 >= axes_box.y0 and box.y1 <= axes_box.y1)
            if not inside or any(box.overlaps(t) for t in taken):
                continue
            lead = _leader(g["xy"], box)
            if any(_covers(t, lead[2:]) for t in taken) or _near(others, lead, 8.0):
                continue
            blocked = _covers(box, obstacles_px) or any(_covers(box, ld) for ld in leaders)
            # a leader crossing a line costs about as much as 25 points of extra length
            score = (blocked, 8 * _near(obstacles_px, lead[2:], 2.5) + math.hypot(dx, dy))
            if best is None or score < best[0]:
                best = (score, dx, dy, ha, box, lead)
        if best is None:
            _annotate(ax, g, *_OFFSETS[0])
            continue
        _, dx, dy, ha, box, lead = best
        _annotate(ax, g, dx, dy, ha)
        taken.append(box)
        leaders.append(lead)


def load_displacement_figure(result, load_kN, disp_mm, *, title: str | None = None,
                             size_in: tuple[float, float] = FIGURE_SIZE_IN):
    """The load–displacement plot of one specimen as a matplotlib figure.

    Parameters
    ----------
    result : Result
        The reduction of the record (loads kN, displacements mm from the
        corrected origin, slopes kN/mm).  If it carries an ``error``, only
        the raw record is drawn, with the message.
    load_kN, disp_mm : array_like
        The record as read: load, kN, and displacement, mm, in the record's
        own origin (``result.origin_offset_mm`` is subtracted here).
    title : str, optional
        Title above the plot; default: specimen, geometry and curve type;
        ``""`` for none.
    size_in : (float, float)
        Figure width and height, inches.

    Returns
    -------
    matplotlib.figure.Figure
        Drawn on an Agg canvas.

    References
    ----------
    ASTM E399 clause 9.1.1 and its figure of the principal record types (the
    construction drawn).
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    P = np.asarray(load_kN, dtype=float)
    v_raw = np.asarray(disp_mm, dtype=float)
    ok = np.isfinite(P) & np.isfinite(v_raw)
    P, v_raw = P[ok], v_raw[ok]
    failed = result.error is not None or result.initial_slope_kN_per_mm is None
    v0 = 0.0 if failed else float(result.origin_offset_mm or 0.0)
    v = v_raw - v0

    fig = Figure(figsize=size_in, dpi=100)
    FigureCanvasAgg(fig)
    fig.subplots_adjust(left=0.10, right=0.98, bottom=0.12, top=0.80)
    ax = fig.add_subplot(1, 1, 1)
    ax.tick_params(labelsize=_FONT_PT)
    ax.grid(True, lw=0.4, color="#d8d8d8")
    ax.set_axisbelow(True)
    vd, Pd = _decimate(v, P)
    ax.plot(vd, Pd, color=_COLOURS["record"], lw=1.0, label="record", zorder=3)

    P_top = float(np.nanmax(P)) if P.size else 1.0
    x_lo = min(0.0, float(np.nanmin(v)) if v.size else 0.0)
    x_hi = (float(np.nanmax(v)) if v.size else 1.0) * 1.08
    ax.set_xlim(x_lo, x_hi if x_hi > x_lo else x_lo + 1.0)
    ax.set_ylim(min(0.0, float(np.nanmin(P)) if P.size else 0.0), 1.26 * P_top if P_top > 0 else 1.0)
    ax.axhline(0.0, color="#888888", lw=0.6, zorder=1)
    ax.set_ylabel("Load $P$ (kN)", fontsize=_FONT_PT + 1)

    if failed:
        ax.set_xlabel("Displacement $v$ as recorded (mm)", fontsize=_FONT_PT + 1)
        msg = "\n".join(textwrap.wrap(f"Not reduced: {result.error or 'no initial slope'}", 80))
        ax.text(0.02, 0.97, msg, transform=ax.transAxes, va="top", ha="left", fontsize=_FONT_PT,
                color="#a00000", bbox=dict(fc="white", ec="#a00000", lw=0.6))
        head = f"{result.specimen}: record not reduced" if title is None else title
        ax.set_title(head, loc="left", fontsize=_FONT_PT + 2, pad=28)
        return fig

    ax.set_xlabel(f"Displacement $v - v_0$ (mm),  $v_0$ = {v0:.4f} mm", fontsize=_FONT_PT + 1)
    k = float(result.initial_slope_kN_per_mm)
    ks = float(result.secant_slope_kN_per_mm or 0.95 * k)
    obstacles = [np.column_stack([vd, Pd])]
    v_init = np.linspace(0.0, min(1.04 * P_top / k, x_hi), 400)
    ax.plot(v_init, k * v_init, color=_COLOURS["initial"], lw=1.0, ls="--",
            label=f"initial line, $k$ = {k:.2f} kN/mm", zorder=4)
    obstacles.append(np.column_stack([v_init, k * v_init]))
    if result.fit_window_fraction_of_P_max:
        lo, hi = result.fit_window_fraction_of_P_max
        P_max = float(result.P_max_kN)
        vf = np.linspace(lo * P_max / k, hi * P_max / k, 20)
        ax.plot(vf, k * vf, color=_COLOURS["initial"], lw=3.0, alpha=0.55, solid_capstyle="butt",
                label=f"fitted band, {lo:.0%}–{hi:.0%} of $P_\\mathrm{{max}}$", zorder=4)
    v_sec = np.linspace(0.0, min(x_hi, 1.06 * P_top / ks), 400)
    ax.plot(v_sec, ks * v_sec, color=_COLOURS["secant"], lw=1.0, ls="-.",
            label=f"95 % secant, {ks:.2f} kN/mm", zorder=4)
    obstacles.append(np.column_stack([v_sec, ks * v_sec]))

    pts = _points(result)
    for name, pv, pP in pts:
        style = {"P_5": dict(marker="o", mfc="white", ms=7), "P_Q": dict(marker="s", mfc=_COLOURS["points"], ms=5),
                 "P_max": dict(marker="^", mfc=_COLOURS["points"], ms=6)}[name]
        ax.plot([pv], [pP], ls="none", mec=_COLOURS["points"], zorder=6, **style)
    ax.legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), ncol=2, fontsize=_FONT_PT - 0.5,
              frameon=False, borderaxespad=0.2, handlelength=2.6)
    head = f"{result.specimen}   {result.geometry or ''}   Type {result.curve_type} record" if title is None else title
    if head:
        fig.suptitle(head, x=0.10, y=0.985, ha="left", fontsize=_FONT_PT + 2, fontweight="bold")
    else:  # no title: give its room to the plot
        fig.subplots_adjust(top=0.86)

    fig.canvas.draw()
    to_px = ax.transData.transform
    obstacles_px = to_px(np.concatenate(obstacles))
    groups = _merge_close(pts, to_px)
    marker_px = np.array([g["xy"] for g in groups]) if groups else np.empty((0, 2))
    _place_labels(fig, ax, groups, np.concatenate([obstacles_px, marker_px]) if marker_px.size
                  else obstacles_px)
    return fig


def plot_bytes(result, load_kN, disp_mm, fmt: str = "png", dpi: int = 200, **kw) -> bytes:
    """The plot rendered to PNG or SVG bytes.

    Parameters
    ----------
    result, load_kN, disp_mm, **kw
        As for :func:`load_displacement_figure` (load kN, displacement mm).
    fmt : {"png", "svg"}
    dpi : int
        Resolution of a PNG, dots per inch.
    """
    fig = load_displacement_figure(result, load_kN, disp_mm, **kw)
    buf = io.BytesIO()
    fig.savefig(buf, format=fmt, dpi=dpi)
    return buf.getvalue()


def write_plot(path, result, load_kN, disp_mm, dpi: int = 150, **kw) -> Path:
    """Write the plot to ``path`` atomically; the suffix (``.png``/``.svg``) picks the format.

    Raises
    ------
    ValueError
        For a suffix other than .png or .svg.
    """
    path = Path(path)
    fmt = path.suffix.lower().lstrip(".")
    if fmt not in ("png", "svg"):
        raise ValueError(f"plot file {path}: the suffix must be .png or .svg, got {path.suffix!r}")
    data = plot_bytes(result, load_kN, disp_mm, fmt=fmt, dpi=dpi, **kw)
    with atomic_path(path) as tmp:
        tmp.write_bytes(data)
    return path

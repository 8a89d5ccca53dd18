"""The QA trend plot: K_Ic by heat over time, the mean and a lower tolerance bound."""

from __future__ import annotations

from datetime import datetime, timedelta

#: colours of ordinary and flagged heats
_BLUE, _RED = "#1f4e79", "#b2182b"


def plot_trend(path, heats, bound, flagged, title: str, *, fmt: str = "png", per_heat_mean: bool = False,
               notes=()) -> None:
    """Draw the trend (:func:`trend_figure`) and write it (atomically) as PNG, SVG or PDF.

    Parameters
    ----------
    path : str or Path
        The file to write.
    heats, bound, flagged, title, per_heat_mean, notes
        As for :func:`trend_figure`.
    fmt : {"png", "svg", "pdf"}
        The format written (the caller matches it to the suffix).

    Raises
    ------
    ValueError
        For a format other than png, svg or pdf.
    """
    if fmt not in ("png", "svg", "pdf"):
        raise ValueError(f"trend plots are written as png, svg or pdf, not {fmt!r}")
    import matplotlib.pyplot as plt

    from reduce.atomic import atomic_path

    fig = trend_figure(heats, bound, flagged, title, per_heat_mean=per_heat_mean, notes=notes)
    try:
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format=fmt, bbox_inches="tight", pad_inches=0.15)
    finally:
        plt.close(fig)


def trend_figure(heats, bound, flagged, title: str, *, per_heat_mean: bool = False, notes=()):
    """The trend as a matplotlib figure (the caller closes it).

    Parameters
    ----------
    heats : list of (str, str, list of float)
        (heat, ISO time the heat was first reduced, its K_Ic values in MPa·m^½),
        oldest first.
    bound : reduce.tolerance.ToleranceBound
        Mean and one-sided lower tolerance bound of the sample.
    flagged : list of str
        Heats with a sample value below the bound (drawn in red and named).
    title : str
    per_heat_mean : bool
        The sample is one mean per heat: the means are drawn as bars across
        each heat's values.
    notes : sequence of str
        Warnings printed under the legend (few values, pooled heats), so
        the plot does not travel without them.

    Returns
    -------
    matplotlib.figure.Figure
        The legend lies below the axes, outside the data; the date axis
        shows dates only.

    References
    ----------
    Natrella, NBS Handbook 91, section 1-6 (one-sided normal tolerance limits).
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.dates as mdates
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(9, 5.6), dpi=120)
    try:
        times = _positions([datetime.fromisoformat(first) for _, first, _ in heats])
        for (heat, _, values), t in zip(heats, times):
            colour = _RED if heat in flagged else _BLUE
            ax.plot([t] * len(values), values, "o", ms=6, color=colour, alpha=0.85)
            if per_heat_mean:
                ax.plot([t], [sum(values) / len(values)], "_", ms=18, mew=2, color=colour,
                        label="heat mean (the sample)" if t == times[0] else None)
        what = "heat means" if per_heat_mean else "results"
        ax.axhline(bound.mean, color="#555555", lw=1.2, label=f"mean of the {bound.n} {what}: "
                                                               f"{bound.mean:.1f} MPa·m^½")
        ax.axhline(bound.lower, color=_RED, lw=1.2, ls="--",
                   label=(f"lower tolerance bound {bound.lower:.1f} MPa·m^½ ({bound.content:.0%} content, "
                          f"{bound.confidence:.0%} confidence, n = {bound.n}, k = {bound.k:.3f})"))
        lanes = _limits(ax, times, heats, bound, flagged)
        _label_heats(ax, times, heats, flagged, lanes)
        _date_axis(ax, mdates)
        ax.set_title(title)
        ax.set_xlabel("heat, by the date it was first reduced")
        ax.set_ylabel("K_Ic (MPa·m^½)")
        ax.grid(True, alpha=0.3)
        # below the axes, outside the data
        legend = ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.22), ncol=1, fontsize=8, frameon=False)
        if notes:
            legend.set_title("\n".join(f"WARNING: {n}" for n in notes), prop={"size": 8})
            legend.get_title().set_color(_RED)
        fig.tight_layout()
    except BaseException:
        plt.close(fig)
        raise
    return fig


def _positions(times) -> list:
    """Where each heat is drawn: at noon of the day it was first reduced (the axis shows
    days), heats of one day spread across it in their order."""
    days = [t.replace(hour=0, minute=0, second=0, microsecond=0, tzinfo=None) for t in times]
    out = []
    for i, day in enumerate(days):
        same = [j for j, d in enumerate(days) if d == day]
        k, n = same.index(i), len(same)
        out.append(day + timedelta(hours=12 + (0 if n == 1 else 16 * (k / (n - 1) - 0.5))))
    return out


#: the heat labels' lanes at the top of the axes, in axes fractions
_LANE_TOP, _LANE_STEP = 0.965, 0.045


def _label_text(heat, flagged) -> str:
    return heat + (" (below bound)" if heat in flagged else "")


def _lanes(fracs, texts, width_frac_per_char=0.0095) -> list:
    """A lane per label (0 = top) so that labels side by side do not overlap."""
    ends, lanes = [], []
    for x, text in sorted(zip(fracs, texts), key=lambda p: p[0]):
        half = len(text) * width_frac_per_char / 2
        lane = next((i for i, end in enumerate(ends) if end < x - half), len(ends))
        if lane == len(ends):
            ends.append(0.0)
        ends[lane] = x + half + 0.01
        lanes.append((x, text, lane))
    return lanes


def _limits(ax, times, heats, bound, flagged) -> list:
    """Room around the data (a day or 5 % of the time span each side), and above it for the
    heat labels; returns the labels' lanes."""
    import matplotlib.dates as mdates

    span = max(times) - min(times)
    pad = max(span * 0.05, timedelta(days=1))
    ax.set_xlim(min(times) - pad, max(times) + pad)
    lo_x, hi_x = ax.get_xlim()
    fracs = [(mdates.date2num(t) - lo_x) / (hi_x - lo_x) for t in times]
    lanes = _lanes(fracs, [_label_text(h, flagged) for h, _, _ in heats])
    values = [v for _, _, vs in heats for v in vs] + [bound.lower, bound.mean]
    lo, hi = min(values), max(values)
    room = max((hi - lo) * 0.06, 0.02 * abs(hi), 0.5)
    lo, hi = lo - room, hi + room
    n_lanes = 1 + max(lane for _, _, lane in lanes)
    free = _LANE_TOP - n_lanes * _LANE_STEP - 0.01  # the fraction of the height the data may use
    ax.set_ylim(lo, lo + (hi - lo) / free)
    return lanes


def _label_heats(ax, times, heats, flagged, lanes) -> None:
    """Each heat's name in a lane above the data, with a faint line down to its values."""
    import matplotlib.dates as mdates
    from matplotlib.transforms import blended_transform_factory

    tr = blended_transform_factory(ax.transData, ax.transAxes)
    where = {text: lane for _, text, lane in lanes}
    for (heat, _, values), t in zip(heats, times):
        text = _label_text(heat, flagged)
        y = _LANE_TOP - where[text] * _LANE_STEP
        colour = _RED if heat in flagged else "#333333"
        ax.text(t, y, text, transform=tr, ha="center", va="top", fontsize=8, color=colour)
        top = ax.transLimits.transform((mdates.date2num(t), max(values)))[1]
        ax.plot([t, t], [top + 0.02, y - 0.035], transform=tr, color="#bbbbbb", lw=0.6, ls=":")


def _date_axis(ax, mdates) -> None:
    """Dates only (no clock times): each day at its noon when the span is short, else automatic."""
    import math

    from matplotlib.ticker import FixedLocator

    lo, hi = ax.get_xlim()
    if hi - lo <= 14:  # matplotlib date numbers are days: a tick at noon of the days shown
        step = max(1, round((hi - lo) / 7))
        locator = FixedLocator([d + 0.5 for d in range(math.floor(lo), math.ceil(hi) + 1, step)
                                if lo <= d + 0.5 <= hi])
    else:
        locator = mdates.AutoDateLocator(minticks=3, maxticks=8)
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.DateFormatter("%Y-%m-%d"))
    ax.figure.autofmt_xdate(rotation=30, ha="right")

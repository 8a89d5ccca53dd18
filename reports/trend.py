"""The QA trend plot: K_Ic by heat over time, the mean and a lower tolerance bound."""

from __future__ import annotations

from datetime import datetime


def plot_trend(path, heats, bound, flagged, title: str) -> None:
    """Draw the trend and write it as PNG (atomically).

    Parameters
    ----------
    path : str or Path
        The PNG to write.
    heats : list of (str, str, list of float)
        (heat, ISO time the heat was first reduced, its K_Ic values in MPa·m^½),
        oldest first.
    bound : reduce.tolerance.ToleranceBound
        Mean and one-sided lower tolerance bound of all the values.
    flagged : list of str
        Heats with a value below the bound (drawn in red and named).
    title : str

    References
    ----------
    Natrella, NBS Handbook 91, section 1-6 (one-sided normal tolerance limits).
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from reduce.atomic import atomic_path

    fig, ax = plt.subplots(figsize=(9, 5), dpi=120)
    try:
        times = [datetime.fromisoformat(first) for _, first, _ in heats]
        for (heat, _, values), t in zip(heats, times):
            low = heat in flagged
            ax.plot([t] * len(values), values, "o", ms=6, color="#b2182b" if low else "#1f4e79",
                    alpha=0.85, label=None)
            ax.annotate(heat + (" (below bound)" if low else ""), (t, max(values)), textcoords="offset points",
                        xytext=(4, 6), fontsize=8, color="#b2182b" if low else "#333333")
        ax.axhline(bound.mean, color="#555555", lw=1.2, label=f"mean {bound.mean:.1f} MPa·m^½")
        ax.axhline(bound.lower, color="#b2182b", lw=1.2, ls="--",
                   label=(f"lower tolerance bound {bound.lower:.1f} MPa·m^½ "
                          f"({bound.content:.0%} content, {bound.confidence:.0%} confidence, "
                          f"n = {bound.n}, k = {bound.k:.3f})"))
        ax.set_title(title)
        ax.set_xlabel("heat, by date first reduced")
        ax.set_ylabel("K_Ic (MPa·m^½)")
        ax.grid(True, alpha=0.3)
        ax.legend(loc="best", fontsize=8)
        fig.autofmt_xdate()
        fig.tight_layout()
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format="png")
    finally:
        plt.close(fig)

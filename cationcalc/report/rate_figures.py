"""Half-life chart: how long each substrate (or leaving group) lasts in each medium, on a log time axis.

One row per substrate and leaving group, one marker per medium; the error
bar is the half-life range from the record's lg k uncertainty; dotted lines
mark a minute, an hour, a day and a year.  Records outside the SN1 model have
no half-life and are listed under the chart instead.

Example
-------
>>> from cationcalc.report.rate_figures import half_life_png
>>> png = half_life_png([{"name": "demo", "leaving_group": "chloride", "medium": "80E20W", "half_life_s": 400.0,
...                       "lg_k_ion_uncertainty": 0.1}])
>>> png[:4] == b"\\x89PNG"
True
"""

from __future__ import annotations

import io
from typing import TYPE_CHECKING

from cationcalc.chem import units

if TYPE_CHECKING:  # pragma: no cover
    import matplotlib.figure

#: reference durations drawn on the chart
MARKS = ((units.SECONDS_PER_MINUTE, "1 min"), (units.SECONDS_PER_HOUR, "1 h"), (units.SECONDS_PER_DAY, "1 day"),
         (units.SECONDS_PER_YEAR, "1 year"))


def _label(record: dict) -> str:
    label = record.get("name") or record.get("input") or "?"
    if record.get("leaving_group"):
        label += f" ({record['leaving_group']})"
    return label


def half_life_figure(records: list[dict]) -> "matplotlib.figure.Figure | None":
    """The matplotlib figure, or None when no record has a half-life."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    rows = [r for r in records if isinstance(r.get("half_life_s"), (int, float)) and not r.get("error")]
    if not rows:
        return None
    media = list(dict.fromkeys(r.get("medium") for r in rows))
    labels = list(dict.fromkeys(_label(r) for r in sorted(rows, key=lambda r: r["half_life_s"])))
    fig, ax = plt.subplots(figsize=(7.2, 1.6 + 0.34 * len(labels)))
    markers = "osD^v<>p"
    offsets = [0.0] if len(media) == 1 else [(-0.2 + 0.4 * i / (len(media) - 1)) for i in range(len(media))]
    for i, m in enumerate(media):
        ys, xs, lows, highs = [], [], [], []
        for r in rows:
            if r.get("medium") != m:
                continue
            t = float(r["half_life_s"])
            u = float(r.get("lg_k_ion_uncertainty") or 0.0)
            ys.append(labels.index(_label(r)) + offsets[i])
            xs.append(t)
            lows.append(t - t / 10 ** u)
            highs.append(t * 10 ** u - t)
        ax.errorbar(xs, ys, xerr=[lows, highs], fmt=markers[i % len(markers)], capsize=3, label=str(m))
    ax.set_xscale("log")
    for seconds, text in MARKS:
        ax.axvline(seconds, color="#999999", ls=":", lw=0.8)
        ax.text(seconds, -0.6, text, fontsize=7, ha="center", va="bottom", color="#555555")
    ax.set_yticks(range(len(labels)))
    ax.set_yticklabels(labels)
    ax.set_ylim(len(labels) - 0.5, -0.9)
    ax.set_xlabel("half-life of R–X, s (log scale; bars: ± the lg k uncertainty)")
    ax.grid(axis="x", alpha=0.2, which="major")
    handles, names = ax.get_legend_handles_labels()
    fig.legend(handles, [f"medium {n}" for n in names], loc="lower center", ncol=min(4, len(media)),
               fontsize="small", frameon=False)
    fig.tight_layout(rect=(0.0, min(0.4, 0.35 / fig.get_figheight()), 1.0, 1.0))
    return fig


def half_life_png(records: list[dict]) -> bytes | None:
    fig = half_life_figure(records)
    if fig is None:
        return None
    import matplotlib.pyplot as plt

    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=110, metadata={"Software": None}, bbox_inches="tight", pad_inches=0.1)
    plt.close(fig)
    return buffer.getvalue()


__all__ = ["half_life_figure", "half_life_png", "MARKS"]

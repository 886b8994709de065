"""Static SVG charts for the handbook, made with matplotlib (not a plugin itself).

Charts are drawn in black and greys with distinct markers and line styles so
they read in greyscale print. ``svg.hashsalt`` is fixed and the ``Date``
metadata left out, so the same data always gives the same bytes.
"""

from __future__ import annotations

import io
import re
from typing import Any

import matplotlib

matplotlib.use("Agg")

import matplotlib.dates as mdates  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402

RC: Any = {
    "svg.hashsalt": "loopledger-handbook",
    "svg.fonttype": "none",  # text stays text: smaller files, selectable and read by screen readers
    "font.family": "DejaVu Sans",
    "font.size": 9,
    "axes.edgecolor": "#333333",
    "axes.linewidth": 0.8,
    "axes.grid": True,
    "grid.color": "#d0d0d0",
    "grid.linewidth": 0.5,
    "path.simplify": False,
}
MARKERS = ["o", "s", "^", "D", "v", "P", "X", "*", "<", ">"]
GREYS = ["#000000", "#444444", "#777777", "#222222", "#555555", "#888888", "#111111", "#666666"]
STYLES = ["-", "--", "-.", ":"]
PHASES = {"as_found": ("As found", "o", "#000000", "-"), "as_left": ("As left", "s", "#555555", "--")}


def _svg(fig: Any) -> str:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None}, bbox_inches="tight")
    plt.close(fig)
    text = buf.getvalue()
    start = text.find("<svg")
    text = text[start:] if start >= 0 else text
    # drop the RDF metadata block: it names outside vocabularies and says nothing about the evidence
    return re.sub(r"\s*<metadata>.*?</metadata>", "", text, count=1, flags=re.S)


def error_chart(data: dict[str, Any], title: str) -> str:
    """Error in % of span against input in %, with the ±MPE band, acceptance limits and U error bars."""
    pts = pd.DataFrame(data["points"])
    with plt.rc_context(RC):
        fig, ax = plt.subplots(figsize=(6.4, 3.4))
        x = pts["input_pct"].astype(float)
        order = np.argsort(x.to_numpy())
        xs = x.to_numpy()[order]
        mpe = pts["mpe_pct"].astype(float).to_numpy()[order]
        if np.isfinite(mpe).any():
            ax.fill_between(xs, -mpe, mpe, color="#e6e6e6", step=None, label="±MPE", zorder=0)
            ax.plot(xs, mpe, color="#999999", lw=0.8, zorder=1)
            ax.plot(xs, -mpe, color="#999999", lw=0.8, zorder=1)
        acc = pts["accept_pct"].astype(float).to_numpy()[order] if "accept_pct" in pts else np.full(len(xs), np.nan)
        if np.isfinite(acc).any() and not np.allclose(acc, mpe, equal_nan=True):
            ax.plot(xs, acc, color="#000000", lw=1.0, ls=(0, (4, 2)), label="acceptance limit")
            ax.plot(xs, -acc, color="#000000", lw=1.0, ls=(0, (4, 2)))
        for phase, (label, marker, colour, style) in PHASES.items():
            mine = pts[pts["phase"] == phase].sort_values("input_pct")
            if mine.empty:
                continue
            u = mine["U_pct"].astype(float) if "U_pct" in mine else pd.Series(np.nan, index=mine.index)
            yerr = u.to_numpy() if u.notna().any() else None
            ax.errorbar(mine["input_pct"].astype(float), mine["error_pct"].astype(float), yerr=yerr,
                        fmt=marker + style, color=colour, mfc="white" if phase == "as_left" else colour,
                        ms=5, lw=1.1, capsize=3, elinewidth=0.9,
                        label=label + (" (bars: U)" if yerr is not None else ""))
        ax.axhline(0, color="#333333", lw=0.6)
        ax.set_xlabel("Input (% of input range)")
        ax.set_ylabel("Error (% of output span)")
        ax.set_title(title, fontsize=9)
        ax.set_xlim(min(-5.0, float(np.nanmin(xs)) - 5) if len(xs) else -5, max(105.0, float(np.nanmax(xs)) + 5)
                    if len(xs) else 105)
        ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
        fig.tight_layout()
        return _svg(fig)


def drift_chart(data: dict[str, Any], title: str) -> str:
    """As-found error over the years, one series per test point, with fitted drift lines when present."""
    pts = pd.DataFrame(data["points"])
    pts["when"] = pd.to_datetime(pts["date"], errors="coerce")
    fits = {round(float(f["input_pct"]), 3): f for f in data.get("fits") or []}
    with plt.rc_context(RC):
        fig, ax = plt.subplots(figsize=(6.4, 3.4))
        for i, (pct, rows) in enumerate(pts.groupby("input_pct", sort=True)):
            marker, colour = MARKERS[i % len(MARKERS)], GREYS[i % len(GREYS)]
            ax.plot(rows["when"], pd.to_numeric(rows["error_pct"], errors="coerce"), marker=marker, ls="none",
                    color=colour, ms=5, label=f"{pct:g} % input")
            if "as_left_pct" in rows:
                left = pd.to_numeric(rows["as_left_pct"], errors="coerce")
                ax.plot(rows["when"], left, marker=marker, ls="none", color=colour, ms=5, mfc="none")
            fit = fits.get(round(float(pct), 3))
            if fit and fit.get("ref_date") and fit.get("slope_pct_per_year") is not None:
                _fit_line(ax, rows, fit, colour, STYLES[i % len(STYLES)], data.get("end"))
        mpe = data.get("mpe_pct")
        if mpe:
            ax.axhline(mpe, color="#999999", lw=0.9, ls=":", label="±MPE")
            ax.axhline(-mpe, color="#999999", lw=0.9, ls=":")
        ax.axhline(0, color="#333333", lw=0.6)
        ax.set_xlabel("Test date")
        ax.set_ylabel("As-found error (% of output span)")
        ax.set_title(title + (" — lines: fitted drift" if fits else ""), fontsize=9)
        ax.xaxis.set_major_locator(mdates.YearLocator())
        ax.xaxis.set_major_formatter(mdates.DateFormatter("%Y"))
        ax.legend(loc="center left", bbox_to_anchor=(1.01, 0.5), fontsize=8, frameon=False)
        fig.tight_layout()
        return _svg(fig)


def _fit_line(ax: Any, rows: pd.DataFrame, fit: dict[str, Any], colour: str, style: Any, end: Any) -> None:
    """The fitted drift line; with the trims made at adjustments it restarts after each one, and the
    last stretch runs on to ``end`` (the as-of date) when that is later."""
    ref = pd.Timestamp(fit["ref_date"])
    slope, intercept = float(fit["slope_pct_per_year"]), float(fit["intercept_pct"] or 0.0)
    when = list(rows["when"])
    if "trims_pct" in rows:
        trims = pd.to_numeric(rows["trims_pct"], errors="coerce").fillna(0.0).tolist()
        last = max(when[-1], pd.Timestamp(end)) if end else when[-1]
        bounds = [*when, last]
        for j in range(len(when)):
            ends = pd.DatetimeIndex([bounds[j], bounds[j + 1]])
            years = (ends - ref).days / 365.25
            ax.plot(ends, intercept + slope * years - trims[j], color=colour, ls=style, lw=1.0)
        return
    ends = pd.DatetimeIndex([min(min(when), ref), max(when)])
    years = (ends - ref).days / 365.25
    ax.plot(ends, intercept + slope * years, color=colour, ls=style, lw=1.0)


def error_alt(data: dict[str, Any]) -> str:
    """A text alternative for :func:`error_chart`: the worst point of each phase against its limit."""
    pts = pd.DataFrame(data["points"])
    parts = []
    for phase, (label, *_rest) in PHASES.items():
        mine = pts[pts["phase"] == phase]
        if mine.empty:
            continue
        worst = mine.loc[mine["error_pct"].astype(float).abs().idxmax()]
        parts.append(f"{label}: {len(mine)} points, largest error {float(worst['error_pct']):+.3f} % of span at "
                     f"{float(worst['input_pct']):g} % input (MPE ±{float(worst['mpe_pct']):.3f} %).")
    return "Chart of error against input. " + " ".join(parts)


def drift_alt(data: dict[str, Any]) -> str:
    pts = pd.DataFrame(data["points"])
    dates = sorted(pts["date"].dropna().unique())
    text = (f"Chart of as-found error over time at {pts['input_pct'].nunique()} test points, "
            f"{len(dates)} tests from {dates[0]} to {dates[-1]}." if dates else "Chart of as-found error over time.")
    for f in data.get("fits") or []:
        if f.get("slope_pct_per_year") is not None:
            text += (f" Fitted drift at {float(f['input_pct']):g} %: "
                     f"{float(f['slope_pct_per_year']):+.3f} % of span a year.")
    return text

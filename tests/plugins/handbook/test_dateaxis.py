"""The drift chart's date axis: calendar ticks labelled as ISO 8601 dates at the precision their step
needs, inside the span drawn, never overlapping. Python's own calendar (``datetime.date``, the standard
library) is the reference for what day a label names and for month and leap-year lengths."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from loopledger.plugins.handbook import dateaxis, svgplot

EPOCH = dt.date(1970, 1, 1)


def day(d: dt.date) -> float:
    return float((d - EPOCH).days)


def named(label: str) -> dt.date:
    """The day a label names: ``2024`` is 1 January, ``2024-03`` the 1st of March."""
    parts = [int(p) for p in label.split("-")]
    return dt.date(parts[0], *(parts[1:] + [1, 1])[:2])


def axis_for(*dates: str) -> tuple[svgplot.Axis, np.ndarray, list[str]]:
    return dateaxis.date_axis(dateaxis.days(list(dates)), svgplot.LEFT, svgplot.RIGHT)


@pytest.mark.parametrize(("dates", "pattern"), [
    (("2026-08-12", "2026-08-25"), r"\d{4}-\d{2}-\d{2}"),   # two weeks: days
    (("2025-08-14", "2026-08-12"), r"\d{4}-\d{2}"),          # a year: months
    (("2022-03-04", "2026-12-04"), r"\d{4}-\d{2}"),          # under five years: months still fit
    (("1995-06-01", "2025-06-01"), r"\d{4}"),                # thirty years: years
])
def test_labels_name_dates_at_the_precision_of_the_span(dates: tuple[str, str], pattern: str) -> None:
    import re

    axis, ticks, labels = axis_for(*dates)
    assert 2 <= len(labels) <= dateaxis.MOST_TICKS
    assert all(re.fullmatch(pattern, t) for t in labels), labels
    # each tick is the day its label names, and lies within the drawn span around the dates
    assert [day(named(t)) for t in labels] == ticks.tolist()
    first, last = day(dt.date.fromisoformat(dates[0])), day(dt.date.fromisoformat(dates[1]))
    pad = max((last - first) * 0.04, 10.0)
    assert axis.lo == pytest.approx(first - pad) and axis.hi == pytest.approx(last + pad)
    assert all(axis.lo <= t <= axis.hi for t in ticks)


def test_month_ticks_fall_on_the_first_whatever_the_month_length() -> None:
    # 2024 is a leap year: 1 March 2024 is 29 days after 1 February (the standard library's calendar)
    _axis, ticks, labels = axis_for("2023-11-20", "2024-06-10")
    days = [named(t) for t in labels]
    assert all(d.day == 1 for d in days)
    assert dt.date(2024, 3, 1) in days and ticks.tolist() == [day(d) for d in days]
    steps = {(b.year - a.year) * 12 + b.month - a.month for a, b in zip(days, days[1:], strict=False)}
    assert len(steps) == 1  # an even step in months


@settings(max_examples=200, deadline=None)
@given(st.dates(dt.date(1900, 1, 1), dt.date(2100, 12, 31)), st.integers(0, 40 * 366))
def test_ticks_fit_and_read_as_their_days(start: dt.date, length: int) -> None:
    end = start + dt.timedelta(days=length)
    axis, ticks, labels = axis_for(start.isoformat(), end.isoformat())
    assert 2 <= len(ticks) <= dateaxis.MOST_TICKS
    assert [day(named(t)) for t in labels] == ticks.tolist()
    assert np.all(np.diff(ticks) > 0) and axis.lo <= ticks[0] and ticks[-1] <= axis.hi
    xs = axis.px(ticks)
    assert np.all((xs >= svgplot.LEFT - 1e-6) & (xs <= svgplot.RIGHT + 1e-6))  # to float rounding
    widths = [svgplot.text_width(t, dateaxis.LABEL_SIZE) for t in labels]
    gaps = np.diff(xs)
    assert all(g >= (a + b) / 2 for g, a, b in zip(gaps, widths, widths[1:], strict=False))  # no two labels touch


def test_no_dates_and_the_calendar_ends_still_give_an_axis() -> None:
    for values in ([], [None, "not a date"], ["0001-01-01"], ["9999-12-31"]):
        axis, ticks, labels = axis_for(*values)
        assert axis.hi > axis.lo and len(ticks) >= 1 and len(labels) == len(ticks)
        assert np.isfinite(axis.px(ticks)).all()

"""Plot decimation keeps big logs small and short dips visible."""

from __future__ import annotations

import numpy as np

from testplan.report.plots import BINS, envelope


def test_a_72_hour_1_hz_log_keeps_a_two_minute_dip() -> None:
    t = np.arange(72 * 3600, dtype=float)
    depth = np.full(len(t), 2100.0)
    depth[30 * 3600 : 30 * 3600 + 120] = 1985.0  # two minutes at 1985 mm
    x, lo, hi = envelope(t, depth)
    assert len(x) <= BINS
    assert lo.min() == 1985.0
    assert hi.max() == 2100.0
    dip_bins = x[lo == 1985.0]
    assert len(dip_bins) in (1, 2)
    assert 30 * 3600 - 72 * 3600 / BINS <= dip_bins[0] <= 30 * 3600 + 120


def test_a_short_log_is_drawn_as_it_is() -> None:
    t = np.arange(100, dtype=float)
    v = np.sin(t)
    x, lo, hi = envelope(t, v)
    assert x is t and lo is v and hi is v

"""The batched J_m table stays exact for high orders at small arguments, where the seeds of
the backward recurrence underflow (regression: garbage J_0 once orders passed ~100)."""

import numpy as np
import scipy.special as sp

from heatsight.forward import bessel
from heatsight.forward.bessel import _JTable, besselj


def test_high_order_table_matches_scipy():
    table = _JTable(160, 400.0)
    x = np.arange(table.v.shape[1]) * 0.05
    for m in (0, 1, 7, 80, 160):
        # scipy.special.jv (reference library)
        assert np.abs(table.v[m] - sp.jv(m, x)).max() < 1e-12


def test_besselj_after_growing_to_high_order(monkeypatch):
    # from a fresh shared table: one that earlier tests grew to large arguments would be
    # rebuilt here at twice their orders over all those arguments (tens of seconds)
    monkeypatch.setattr(bessel, "_table", None)
    x = np.linspace(0.0, 30.0, 301)
    besselj(np.full(x.size, 150), x)  # grow the shared table to a high order first
    assert np.abs(besselj(np.zeros(x.size, int), x) - sp.j0(x)).max() < 1e-12  # scipy.special.j0


def test_table_values_do_not_depend_on_what_the_process_asked_before(monkeypatch):
    """J_m from the table is the same to the last bit whether the table was first built for
    few orders and small arguments, or grown to many orders and large arguments by an earlier
    fit (a fleet worker runs parts one after another; each must match the part run alone)."""
    from heatsight.forward import bessel

    m = np.repeat(np.arange(0, 12), 50)
    x = np.tile(np.linspace(0.0, 40.0, 50), 12)
    monkeypatch.setattr(bessel, "_table", None)
    fresh = bessel.besselj(m, x)
    monkeypatch.setattr(bessel, "_table", None)
    bessel.besselj(np.array([3]), np.array([900.0]))          # a table grown in argument first
    bessel.besselj(np.array([70]), np.array([5.0]))           # then in order (rebuilt)
    assert bessel._table.max_order >= 70
    assert np.array_equal(bessel.besselj(m, x), fresh)
    assert np.abs(fresh - sp.jv(m, x)).max() < 4e-13    # reference library: scipy.special.jv

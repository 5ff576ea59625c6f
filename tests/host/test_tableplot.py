"""tcgauge.tableplot: the data drawn, checked against the tables, bands and unit definitions.

1 Torr = 101325/760 Pa, 1 mbar = 100 Pa (NIST SP 811 (2008), B.8).
"""

import numpy as np
import pytest
from matplotlib.image import imread

from tcgauge import derive, tableplot
from tcgauge.tubefit import fit_n2_table

from n2_bench import n2_table

PA_PER_TORR = 101325.0 / 760.0


@pytest.fixture(scope="module")
def tables():
    n2 = n2_table()
    fit = fit_n2_table(n2)
    he = derive.derive_table(n2, "He", fit=fit)
    ar = derive.derive_table(n2, "Ar", fit=fit)
    return n2, he, ar


def test_data_drawn_matches_tables_and_bands(tables, tmp_path):
    n2, he, ar = tables
    path = str(tmp_path / "t.png")
    data = tableplot.plot_tables(path, [n2, he.table, ar.table], [None, he.band, ar.band])
    assert [s["label"] for s in data["series"]] == ["N$_2$, wren-demo", "He, wren-demo",
                                                    "Ar, wren-demo"]
    assert data["symbol"] == "Torr"
    s = data["series"][1]
    pts = np.array(he.table.points)
    np.testing.assert_allclose(s["points_p"], pts[:, 1] / PA_PER_TORR, rtol=1e-12)
    np.testing.assert_array_equal(s["points_emf_mv"], pts[:, 0])
    # the curve is the core's conversion: at the curve's EMFs, Table.convert gives the curve's pressure
    for k in (0, 57, 133, len(s["curve_p"]) - 1):
        p, state = he.table.convert(float(s["curve_emf_mv"][k]))
        assert state == "ok"
        assert s["curve_p"][k] == pytest.approx(p / PA_PER_TORR, rel=1e-9)
    np.testing.assert_allclose(s["band"]["lower"], he.band.lower_pa / PA_PER_TORR, rtol=1e-12)
    np.testing.assert_allclose(s["band"]["upper"], he.band.upper_pa / PA_PER_TORR, rtol=1e-12)
    assert data["series"][0]["band"] is None
    # under range: below the lowest table point of all three; over range: above the highest
    p_lo = min(t.p_min_pa for t in (n2, he.table, ar.table)) / PA_PER_TORR
    p_hi = max(t.p_max_pa for t in (n2, he.table, ar.table)) / PA_PER_TORR
    assert data["under"][1] == pytest.approx(p_lo, rel=1e-12)
    assert data["over"][0] == pytest.approx(p_hi, rel=1e-12)
    img = imread(path)
    assert img.shape[:2] == (780, 1200)  # 10 x 6.5 in at 120 dpi
    # the under/over regions are shaded 0.85 grey: a good share of the pixels
    grey = np.all(np.abs(img[:, :, :3] - 0.85) < 0.01, axis=2)
    assert grey.mean() > 0.05


def test_units(tables, tmp_path):
    n2 = tables[0]
    torr = tableplot.plot_data([n2], unit="TORR")
    mbar = tableplot.plot_data([n2], unit="mbar")
    assert mbar["symbol"] == "mbar"
    np.testing.assert_allclose(torr["series"][0]["points_p"] * PA_PER_TORR,
                               mbar["series"][0]["points_p"] * 100.0, rtol=1e-12)
    with pytest.raises(ValueError) as exc:
        tableplot.plot_data([n2], unit="inHg")
    assert str(exc.value) == "unknown pressure unit 'inHg' (use PA, TORR, MBAR or MICRON)"
    with pytest.raises(ValueError) as exc:
        tableplot.plot_tables(str(tmp_path / "x.png"), [])
    assert str(exc.value) == "plot_tables: no tables to plot"

"""`tcgauge table show | plot | derive` through tcgauge.cli.main.

1 Torr = 101325/760 Pa (NIST SP 811 (2008), B.8).
"""

import os
import re

import pytest

from gaugecore import tablefile
from tcgauge import band as bandmod
from tcgauge import cli

from n2_bench import n2_table

PA_PER_TORR = 101325.0 / 760.0


@pytest.fixture(scope="module")
def n2_file(tmp_path_factory):
    path = str(tmp_path_factory.mktemp("tables") / "n2.json")
    tablefile.save(path, n2_table())
    return path


def _parse(path):
    with open(path, "rb") as f:
        return tablefile.parse(f.read())


def run(capsys, *argv):
    rc = cli.main(list(argv))
    out, err = capsys.readouterr()
    return rc, out, err


def test_show_lists_points_in_the_unit(capsys, n2_file):
    rc, out, err = run(capsys, "table", "show", n2_file)
    assert rc == 0 and err == ""
    table, crc = _parse(n2_file)
    lines = out.splitlines()
    assert lines[0] == "%s: ok" % n2_file
    assert "  crc32 0x%08x (verified)" % crc in lines
    rows = [ln for ln in lines if re.match(r"^ +\d+ +\d+\.\d{5} ", ln)]
    assert len(rows) == len(table.points)
    k, e, p_torr, p_pa = rows[7].split()
    assert int(k) == 7
    assert float(e) == pytest.approx(table.points[7][0], abs=5e-6)
    assert float(p_torr) == pytest.approx(table.points[7][1] / PA_PER_TORR, rel=1e-4)
    assert float(p_pa) == pytest.approx(table.points[7][1], rel=1e-4)
    rc, out, err = run(capsys, "table", "show", n2_file, "--unit", "PA")
    assert rc == 0
    assert "    #      EMF mV          p Pa" in out.splitlines()  # one pressure column


def test_show_errors_are_one_line(capsys, n2_file, tmp_path):
    rc, out, err = run(capsys, "table", "show", n2_file, "--unit", "furlong")
    assert rc == 2 and out == ""
    assert err == "tcgauge: error: unknown pressure unit 'furlong' (use PA, TORR, MBAR or MICRON)\n"
    missing = str(tmp_path / "none.json")
    rc, out, err = run(capsys, "table", "show", missing)
    assert rc == 2
    assert err == "tcgauge: error: %s: cannot read: No such file or directory\n" % missing


def test_derive_writes_table_and_band_and_refuses_to_overwrite(capsys, n2_file, tmp_path):
    out_path = str(tmp_path / "ar.json")
    rc, out, err = run(capsys, "table", "derive", n2_file, "--gas", "Ar", "-o", out_path)
    assert rc == 0, err
    lines = out.splitlines()
    assert lines[0].startswith("fit of the wren-demo tube model to the N2 table (40 points")
    assert any(ln.startswith("  residuals: rms ") for ln in lines)
    assert any(ln.startswith("band (Ar): ") for ln in lines)
    warns = [ln for ln in lines if ln.startswith("warning: ")]
    assert len(warns) == 1 and warns[0].startswith("warning: continuum: ")
    bpath = str(tmp_path / "ar.band.json")
    assert "wrote %s and %s" % (out_path, bpath) in lines
    table, crc = _parse(out_path)
    assert table.gas == "Ar" and len(table.points) == 40
    band = bandmod.load(bpath, crc)
    assert band.gas == "Ar"
    # check still works on the derived file; show adds the band's columns
    assert run(capsys, "table", "check", out_path)[0] == 0
    rc, out, err = run(capsys, "table", "show", out_path)
    assert rc == 0
    assert "lower Torr" in out and "upper Torr" in out
    row = [ln for ln in out.splitlines() if re.match(r"^ +3 +\d+\.\d{5} ", ln)][0].split()
    assert float(row[4]) == pytest.approx(band.lower_pa[3] / PA_PER_TORR, rel=1e-4)
    # a second run refuses, --force overwrites
    rc, out, err = run(capsys, "table", "derive", n2_file, "--gas", "Ar", "-o", out_path)
    assert rc == 2 and out == ""
    assert err == "tcgauge: error: %s exists; use --force to overwrite\n" % out_path
    rc, out, err = run(capsys, "table", "derive", n2_file, "--gas", "Ar", "-o", out_path,
                       "--force", "--p-min", "1e-3", "--p-max", "0.2", "--points", "12")
    assert rc == 0
    assert "no warnings: the requested range lies where the derivation is well supported" in out
    table = tablefile.load(out_path)
    assert len(table.points) == 12
    assert table.p_min_pa == pytest.approx(1e-3 * PA_PER_TORR, rel=1e-9)


def test_derive_errors(capsys, n2_file, tmp_path):
    out_path = str(tmp_path / "x.json")
    rc, out, err = run(capsys, "table", "derive", n2_file, "--gas", "N2", "-o", out_path)
    assert rc == 2
    assert err == "tcgauge: error: the base table is already for N2: nothing to derive\n"
    he = str(tmp_path / "he.json")
    assert run(capsys, "table", "derive", n2_file, "--gas", "He", "-o", he)[0] == 0
    rc, out, err = run(capsys, "table", "derive", he, "--gas", "Ar", "-o", out_path)
    assert rc == 2
    assert err == "tcgauge: error: the base table must be an N2 table, this one is for He\n"
    assert not os.path.exists(out_path)
    # a band sidecar of another table is refused, not applied
    os.replace(str(tmp_path / "he.band.json"), str(tmp_path / "n2copy.band.json"))
    n2copy = str(tmp_path / "n2copy.json")
    tablefile.save(n2copy, tablefile.load(n2_file))
    rc, out, err = run(capsys, "table", "show", n2copy)
    assert rc == 2
    crc = _parse(n2copy)[1]
    he_crc = _parse(he)[1]
    assert err == ("tcgauge: error: %s: band belongs to table crc32 0x%08x, not to this table "
                   "(0x%08x)\n" % (str(tmp_path / "n2copy.band.json"), he_crc, crc))


def test_plot_writes_a_png(capsys, n2_file, tmp_path):
    he = str(tmp_path / "he.json")
    assert run(capsys, "table", "derive", n2_file, "--gas", "He", "-o", he)[0] == 0
    png = str(tmp_path / "plot.png")
    rc, out, err = run(capsys, "table", "plot", n2_file, he, "-o", png, "--unit", "MBAR")
    assert rc == 0
    assert out == "%s: 2 table(s), bands shaded\n" % png
    with open(png, "rb") as f:
        assert f.read(8) == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    rc, out, err = run(capsys, "table", "plot", n2_file, "-o", str(tmp_path / "no" / "p.png"))
    assert rc == 2
    assert err.startswith("tcgauge: error: cannot write %s: " % str(tmp_path / "no" / "p.png"))
    assert err.count("\n") == 1

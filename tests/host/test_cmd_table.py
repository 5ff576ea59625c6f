"""`tcgauge table check FILE`: good files summarised, bad files one line on stderr.

Torr conversion checked against NIST SP 811 (2008) B.8: 1 Torr = 101325/760 Pa.
"""

import os
import subprocess
import zlib

import pytest

from gaugecore import tablefile
from tcgauge import cli

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
DEMO = os.path.join(ROOT, "firmware", "tables", "demo_n2.json")
TCGAUGE = os.path.join(ROOT, ".venv", "bin", "tcgauge")


def demo_text():
    with open(DEMO, encoding="utf-8") as f:
        return f.read()


def reseal(body):
    # CRC by zlib, independent of the module under test.
    return body + '"crc32": "0x%08x"}\n' % zlib.crc32(body.encode("utf-8"))


@pytest.fixture
def bad_files(tmp_path):
    text = demo_text()
    body = text[: text.rindex('"crc32"')]
    table = tablefile.loads(text)
    e1, p1 = table.points[1]
    e2, p2 = table.points[2]
    swapped = body.replace("[%.10g, %.10g]" % (e2, p2), "[%.10g, %.10g]" % (e1 + 1.0, p2))
    crc = zlib.crc32(body.encode())
    damaged = body.replace("[%.10g," % e2, "[%.10g," % (e2 + 0.5))
    files = {
        "truncated": (text[: len(text) // 2],
                      "not valid JSON (truncated or damaged file?)"),
        "bad_crc": (damaged + text[len(body):],
                    "crc mismatch: file says 0x%08x, content gives 0x%08x"
                    % (crc, zlib.crc32(damaged.encode()))),
        "non_monotone": (reseal(swapped),
                         "point 2: EMF must fall strictly as pressure rises "
                         "(%.6g mV at %.6g Pa is not below %.6g mV at %.6g Pa)"
                         % (e1 + 1.0, p2, e1, p1)),
    }
    out = {}
    for name, (content, msg) in files.items():
        path = str(tmp_path / (name + ".json"))
        with open(path, "w", encoding="utf-8") as f:
            f.write(content)
        out[name] = (path, "tcgauge: error: %s: %s" % (path, msg))
    return out


def expected_summary(path):
    t, crc = tablefile.parse(demo_text())
    torr = 101325.0 / 760.0  # NIST SP 811 B.8
    return [
        "%s: ok" % path,
        "  gas N2, profile wren-demo, type K junction, heater %.6g mA, EMFs at ref %.6g C"
        % (t.heater_ma, t.ref_c),
        "  %d points, %.4g .. %.4g Pa (%.4g .. %.4g Torr), EMF %.4g .. %.4g mV"
        % (len(t.points), t.p_min_pa, t.p_max_pa, t.p_min_pa / torr, t.p_max_pa / torr,
           t.emf_range_mv[0], t.emf_range_mv[1]),
        "  source: %s" % t.source,
        "  crc32 0x%08x (verified)" % crc,
    ]


def test_check_good_file_in_process(capsys):
    assert cli.main(["table", "check", DEMO]) == 0
    out, err = capsys.readouterr()
    assert out.splitlines() == expected_summary(DEMO)
    assert err == ""


@pytest.mark.parametrize("name", ["truncated", "bad_crc", "non_monotone"])
def test_check_bad_file_in_process(capsys, bad_files, name):
    path, line = bad_files[name]
    assert cli.main(["table", "check", path]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert err.splitlines() == [line]


def test_check_missing_file(capsys, tmp_path):
    path = str(tmp_path / "none.json")
    assert cli.main(["table", "check", path]) == 2
    assert capsys.readouterr().err == "tcgauge: error: %s: cannot read: No such file or directory\n" % path


def test_table_without_a_verb_shows_its_help(capsys):
    assert cli.main(["table"]) == 2
    assert "check" in capsys.readouterr().out


def test_check_through_the_installed_command(bad_files):
    good = subprocess.run([TCGAUGE, "table", "check", DEMO], capture_output=True, text=True,
                          timeout=60)
    assert good.returncode == 0, good.stderr
    assert good.stdout.splitlines() == expected_summary(DEMO)
    for name in ("truncated", "bad_crc", "non_monotone"):
        path, line = bad_files[name]
        bad = subprocess.run([TCGAUGE, "table", "check", path], capture_output=True, text=True,
                             timeout=60)
        assert bad.returncode == 2
        assert bad.stdout == ""
        assert bad.stderr.splitlines() == [line]
        assert "Traceback" not in bad.stderr

"""tools/tables/make_sim_table.py: a table file from the simulator that converts back to the simulator."""

import importlib.util
import os

import numpy as np
import pytest

from gaugecore import states
from gaugecore.tablefile import load
from tcgauge.sim.tube import steady_state

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def _tool():
    path = os.path.join(ROOT, "tools", "tables", "make_sim_table.py")
    spec = importlib.util.spec_from_file_location("make_sim_table", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_table_file_round_trips_to_the_simulated_pressure(tmp_path):
    tool = _tool()
    out = str(tmp_path / "sim_ar.json")
    assert tool.main([out, "--gas", "Ar", "--points", "32"]) == 0
    table = load(out)
    assert (table.gas, table.profile, table.tc_type, table.heater_ma, table.ref_c) == ("Ar", "wren-demo", "K", 165.0, 0.0)
    assert len(table.points) == 32
    assert table.source.startswith("simulated, not measured: tcgauge.sim.tube.steady_state")
    assert "gas Ar" in table.source and "wall 22 C" in table.source
    # between the grid points, the monotone cubic in log p recovers the simulator's pressure
    p = np.logspace(np.log10(0.08), np.log10(300.0), 17)
    emf = steady_state("wren-demo", "Ar", p, 0.165, t_wall_c=22.0, t_ref_c=0.0).emf_mv
    for pp, e in zip(p, emf):
        got, state = table.convert(float(e))
        assert state == states.OK
        assert got == pytest.approx(pp, rel=0.01)


def test_existing_and_shipped_files_are_kept(tmp_path, capsys):
    tool = _tool()
    out = tmp_path / "t.json"
    out.write_text("keep")
    assert tool.main([str(out)]) == 2
    assert out.read_text() == "keep"
    assert "exists (use --force to replace it)" in capsys.readouterr().err
    assert tool.main([os.path.join(ROOT, "firmware", "tables", "demo_n2.json"), "--force"]) == 2
    assert "is the shipped demo table" in capsys.readouterr().err


def test_bad_grid_is_refused():
    tool = _tool()
    with pytest.raises(ValueError, match=r"^points must be 4\.\.128, got 3$"):
        tool.make_table(points=3)
    with pytest.raises(ValueError, match=r"^need 0 < p_min_pa < p_max_pa, got 10 and 1$"):
        tool.make_table(p_min_pa=10.0, p_max_pa=1.0)

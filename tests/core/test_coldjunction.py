"""Cold-junction compensation (gaugecore.coldjunction).

Sources:
- [M175] NIST Monograph 175 tables (0.001 mV), quoted in docs/physics.md
  section 4: K 25 C = 1.000 mV, K 300 C = 12.209 mV.
- Law of intermediate temperatures, E_AB(T1, T3) = E_AB(T1, T2) + E_AB(T2, T3)
  (standard thermocouple theory, e.g. the introduction of [M175]; also the
  basis of IEC 60584-1's 0 C-referenced tables).
- [PKG] PyPI `thermocouples` 2.1.2, volt_to_temp_with_cjc (reference junction
  EMF added, then its bare published inverse polynomial; volts in, deg C out).
"""

import pytest
import thermocouples
from hypothesis import given, settings
from hypothesis import strategies as st

from gaugecore import thermocouple as tc
from gaugecore.coldjunction import ColdJunction, hot_junction_c, refer_emf_mv


def test_k_300_against_25_from_published_table():
    # [M175]: E(300) - E(25) = 12.209 - 1.000 mV; each table value is rounded
    # to 0.001 mV, so the difference carries up to 0.001 mV, i.e.
    # 0.001 / S(300) = 0.024 C
    s_mv_per_c = tc.seebeck_uv_per_k("K", 300.0) / 1000.0
    t1 = hot_junction_c("K", 12.209 - 1.000, 25.0)
    assert abs(t1 - 300.0) <= 0.001 / s_mv_per_c
    # with unrounded EMFs the answer is exact
    e_meas = tc.emf_mv("K", 300.0) - tc.emf_mv("K", 25.0)
    assert abs(hot_junction_c("K", e_meas, 25.0) - 300.0) < 1e-6
    assert abs(ColdJunction("K", 0.0).hot_junction_c(e_meas, 25.0) - 300.0) < 1e-6


def test_refer_from_25_to_0_adds_e_25():
    # [M175]: E(25) = 1.000 mV for type K
    e_meas = 12.209 - 1.000
    referred = refer_emf_mv("K", e_meas, 25.0, 0.0)
    assert abs(referred - 12.209) <= 0.0005
    assert referred == e_meas + tc.emf_mv("K", 25.0)
    # and back again: referring to the junction's own temperature changes nothing
    assert abs(refer_emf_mv("K", referred, 0.0, 25.0) - e_meas) < 1e-12


def test_cold_junction_class_matches_functions():
    # the class is the cached form of refer_emf_mv / hot_junction_c
    for tc_type in tc.TYPES:
        for t_ref in (0.0, 20.0, 25.0):
            cj = ColdJunction(tc_type, t_ref)
            assert cj.emf_ref_mv == tc.emf_mv(tc_type, t_ref)
            for t_cj in (-10.0, 18.5, 25.0, 40.0):
                e_meas = tc.emf_mv(tc_type, 150.0) - tc.emf_mv(tc_type, t_cj)
                assert cj.refer(e_meas, t_cj) == pytest.approx(refer_emf_mv(tc_type, e_meas, t_cj, t_ref), abs=1e-12)
                # referred EMF is what the hot junction gives against t_ref
                assert cj.refer(e_meas, t_cj) == pytest.approx(
                    tc.emf_mv(tc_type, 150.0) - tc.emf_mv(tc_type, t_ref), abs=1e-12
                )
                assert abs(cj.hot_junction_c(e_meas, t_cj) - 150.0) < 1e-6


# [PKG] uses the bare inverse polynomial: agreement within the published
# inverse error bands (NIST ITS-90 database allcoeff.tab) plus 0.005 C for
# their printed rounding. Only ranges where [PKG] 2.1.2 carries the
# published inverse (see test_thermocouple.PKG_DEFECTS).
CJC_CASES = [
    ("K", 0.0, 500.0, -0.05, 0.04), ("K", 500.0, 1300.0, -0.05, 0.06),
    ("E", 0.0, 900.0, -0.02, 0.02), ("T", 0.0, 390.0, -0.03, 0.03),
    ("J", 0.0, 700.0, -0.04, 0.04),
]


@pytest.mark.parametrize("tc_type,t_lo,t_hi,err_lo,err_hi", CJC_CASES)
def test_agrees_with_package_cjc(tc_type, t_lo, t_hi, err_lo, err_hi):
    p = thermocouples.get_thermocouple(tc_type)
    for i in range(101):
        t1 = t_lo + 10.0 + (t_hi - t_lo - 20.0) * i / 100  # hot junction
        for t_cj in (-5.0, 0.0, 23.0, 45.0):
            v_meas = p.temp_to_volt(t1) - p.temp_to_volt(t_cj)  # volts
            theirs = p.volt_to_temp_with_cjc(v_meas, t_cj)
            ours = hot_junction_c(tc_type, v_meas * 1e3, t_cj)
            assert err_lo - 0.005 <= theirs - ours <= err_hi + 0.005
            assert abs(ours - t1) < 1e-6


@st.composite
def three_temperatures(draw):
    tc_type = draw(st.sampled_from(tc.TYPES))
    lo, hi = tc.range_c(tc_type)
    temps = st.floats(min_value=lo, max_value=hi)
    cj = st.floats(min_value=-50.0, max_value=150.0)
    return tc_type, draw(temps), draw(cj), draw(cj)


@settings(max_examples=300, deadline=None)
@given(three_temperatures())
def test_law_of_intermediate_temperatures(case):
    # E(T1, T3) = E(T1, T2) + E(T2, T3): referring via any junction
    # temperature gives the same EMF, and the hot junction comes back exactly
    tc_type, t1, t_cj, t_ref = case
    e_meas = tc.emf_mv(tc_type, t1) - tc.emf_mv(tc_type, t_cj)
    direct = tc.emf_mv(tc_type, t1) - tc.emf_mv(tc_type, t_ref)
    assert refer_emf_mv(tc_type, e_meas, t_cj, t_ref) == pytest.approx(direct, abs=1e-12)
    assert ColdJunction(tc_type, t_ref).refer(e_meas, t_cj) == pytest.approx(direct, abs=1e-12)
    assert abs(hot_junction_c(tc_type, e_meas, t_cj) - t1) < 1e-6


def test_errors_name_the_range():
    # messages come from gaugecore.thermocouple ([M175] ranges)
    with pytest.raises(ValueError) as info:
        hot_junction_c("K", 1.0, 1400.0)
    assert str(info.value) == "type K: 1400 C is outside -270..1372 C"
    with pytest.raises(ValueError) as info:
        hot_junction_c("K", 54.0, 25.0)  # 54 + E(25) is above E(1372)
    assert str(info.value) == "type K: %.12g mV is outside -6.4577..54.8864 mV" % (54.0 + tc.emf_mv("K", 25.0))
    with pytest.raises(ValueError) as info:
        ColdJunction("X", 0.0)
    assert str(info.value) == "unknown thermocouple type 'X' (known: E, J, K, N, T)"
    with pytest.raises(ValueError) as info:
        ColdJunction("T", 500.0)
    assert str(info.value) == "type T: 500 C is outside -270..400 C"
    with pytest.raises(ValueError) as info:
        ColdJunction("T", 25.0).refer(1.0, -300.0)
    assert str(info.value) == "type T: -300 C is outside -270..400 C"


# ---------------------------------------------------------------- rise referral


def _exact_rise_referral(table, e_meas, t_cj):
    """The referral of gaugecore.coldjunction's docstring, every function evaluated afresh."""
    from gaugecore.thermocouple import emf_mv, temperature_c
    import math

    ty = table.tc_type
    rise = temperature_c(ty, e_meas + emf_mv(ty, t_cj)) - t_cj
    d = t_cj - table.wall_c
    e_ref = emf_mv(ty, table.ref_c)
    k = table.rise_slope_at(e_meas + emf_mv(ty, table.wall_c) - e_ref)
    r = rise * math.exp(-k * d)
    k = table.rise_slope_at(emf_mv(ty, table.wall_c + r) - e_ref)
    r = rise * math.exp(-k * d)
    return emf_mv(ty, table.wall_c + r) - e_ref


@pytest.mark.parametrize("tc_type", ["E", "J", "K", "N", "T"])
def test_rise_referral_anchors_follow_the_exact_functions(tc_type):
    from gaugecore.coldjunction import RiseReferral
    from gaugecore.table import Table

    # invented table: EMFs 0.5..12 mV, slopes -0.002..+0.0003 per K, wall 23 C
    n = 12
    pts = [(12.0 - 11.5 * i / (n - 1), 0.02 * 3.0 ** i) for i in range(n)]
    slopes = [-0.002 + 0.0023 * i / (n - 1) for i in range(n)]
    t = Table(pts, "N2", "wren-demo", 150.0, 0.0, tc_type, "invented", wall_c=23.0,
              rise_slope_per_k=slopes)
    r = RiseReferral(t)
    worst = 0.0
    # a slow sweep (anchors reused) and jumps (anchors renewed), junction 15..35 C
    e = 0.6
    t_cj = 15.0
    while e < 11.9:
        got = r.refer(e, t_cj)
        worst = max(worst, abs(got - _exact_rise_referral(t, e, t_cj)))
        e += 0.003 if e < 6.0 else 0.11
        t_cj = 15.0 + (t_cj - 15.0 + 0.05) % 20.0
    # the anchors' linearisation leaves under 0.03 uV (coldjunction.INV_ANCHOR_MV, FWD_ANCHOR_C)
    assert worst < 3e-5, worst
    # on the table's wall, the referral is the law of intermediate temperatures
    assert r.refer(5.0, 23.0) == pytest.approx(refer_emf_mv(tc_type, 5.0, 23.0, 0.0), abs=3e-5)
    # out of the couple's range: NaN (read as invalid by Table.convert), no exception
    bad = r.refer(500.0, 23.0)
    assert bad != bad and t.convert(bad) == (None, "invalid")

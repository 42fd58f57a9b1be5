"""The pick's figures for the report: the Check sheet's rows against the textbook formulas, the
temperature curves of the ideal model."""
from __future__ import annotations

import math

import numpy as np

from sweep.pick import check_table, temperature_curves
from sweep.study import parse_study

from .test_reporting import ASTABLE, MONOSTABLE, ranked


def test_check_rows_of_an_astable_are_the_textbook_figures():
    st = parse_study(ASTABLE, "a.toml")
    df = check_table(st, ranked(st))
    assert len(df) == min(st.top, st.n_designs)
    ra, rb, c = df["ra_ohm"], df["rb_ohm"], df["c_f"]
    # f = 1 / (ln2 (RA + 2 RB) C), duty = (RA + RB) / (RA + 2 RB) [book: the standard astable]
    np.testing.assert_allclose(df["ideal_frequency_hz"], 1 / (math.log(2) * (ra + 2 * rb) * c), rtol=1e-9)
    np.testing.assert_allclose(df["ideal_duty"], (ra + rb) / (ra + 2 * rb), rtol=1e-9)
    # the realistic figures sit near the textbook [ds-bip: timing accuracy of a few per cent]
    np.testing.assert_allclose(df["real_frequency_hz"], df["ideal_frequency_hz"], rtol=0.1)
    assert (df["vcc_v"] == 9.0).all()                  # the nominal supply: the middle of 6..12 V


def test_check_rows_of_a_monostable_are_ln3_rc():
    st = parse_study(MONOSTABLE, "m.toml")
    df = check_table(st, ranked(st))
    # tw = ln3 R C = 1.1 R C [book: the standard monostable]
    np.testing.assert_allclose(df["ideal_pulse_width_s"], math.log(3) * df["r_ohm"] * df["c_f"], rtol=1e-9)


def test_ideal_temperature_curves_are_flat_at_the_textbook_figure():
    st = parse_study(ASTABLE, "a.toml")
    designs = ranked(st)
    curves = temperature_curves(st, designs, ideal=True)
    assert curves["temperature_c"].min() == 0 and curves["temperature_c"].max() == 50
    assert set(curves["vcc_v"]) == {6.0, 9.0, 12.0}
    top = designs.set_index("rank")
    for rank, g in curves.groupby("rank"):
        d = top.loc[rank]
        # [book] the ideal astable depends on RA, RB and C only: no supply or temperature
        f = 1 / (math.log(2) * (d["ra_ohm"] + 2 * d["rb_ohm"]) * d["c_f"])
        np.testing.assert_allclose(g["value"], f, rtol=1e-9)
        assert (g["drift_typ"] == 0).all() and (g["drift_max"] == 0).all()
    # realistic curves carry the chip's drift band, wider at its maximum than typically
    real = temperature_curves(st, designs, ideal=False)
    assert (real["drift_max"] >= real["drift_typ"]).all() and (real["drift_max"] > 0).any()

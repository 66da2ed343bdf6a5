"""Correlations against reference libraries (fluids, ht, CoolProp), each naming the exact method compared."""

import math

import pytest
from tubewright.models import correlations as corr
from tubewright.models.backend import NUMPY as m

fluids = pytest.importorskip("fluids")
ht = pytest.importorskip("ht")


@pytest.mark.parametrize("re, rr", [(500.0, 0.0), (3000.0, 1e-4), (1e5, 1e-3), (1e7, 0.0)])
def test_churchill_friction_against_fluids(re, rr):
    # fluids.friction.Churchill_1977 (the same published equation; not fluids' default dispatcher).
    assert corr.churchill_1977_friction(m, re, rr) == pytest.approx(fluids.friction.Churchill_1977(re, rr), rel=1e-12)


def test_churchill_laminar_limit_is_64_over_re():
    # Analytic Hagen-Poiseuille limit: f = 64/Re.
    assert corr.churchill_1977_friction(m, 100.0, 0.0) == pytest.approx(0.64, rel=1e-6)


@pytest.mark.parametrize("dp, eps, g, rho, mu", [(3e-3, 0.4, 2.0, 4.0, 3e-5), (6e-3, 0.45, 8.0, 10.0, 2e-5)])
def test_ergun_against_fluids(dp, eps, g, rho, mu):
    # fluids.packed_bed.Ergun(dp, voidage, vs, rho, mu, L=1) gives the pressure drop per metre.
    ref = fluids.packed_bed.Ergun(dp=dp, voidage=eps, vs=g / rho, rho=rho, mu=mu, L=1.0)
    assert corr.ergun_pressure_gradient(m, g, rho, mu, dp, eps) == pytest.approx(ref, rel=1e-12)


@pytest.mark.parametrize("re, pr", [(5e3, 0.7), (1e5, 5.0), (1e6, 50.0)])
def test_gnielinski_against_ht(re, pr):
    # ht.conv_internal.turbulent_Gnielinski(Re, Pr, fd) with the same Darcy friction factor passed in.
    fd = corr.petukhov_friction(m, re)
    assert corr.gnielinski_nusselt(m, re, pr, fd) == pytest.approx(ht.conv_internal.turbulent_Gnielinski(re, pr, fd),
                                                                 rel=1e-12)


@pytest.mark.parametrize("heating", [True, False])
def test_dittus_boelter_against_ht(heating):
    # ht.conv_internal.turbulent_Dittus_Boelter(Re, Pr, heating) (0.023 Re^0.8 Pr^0.4 or Pr^0.3).
    ref = ht.conv_internal.turbulent_Dittus_Boelter(2e4, 3.0, heating=heating)
    assert corr.dittus_boelter_nusselt(m, 2e4, 3.0, heating) == pytest.approx(ref, rel=1e-12)


def test_laminar_nusselt_against_ht():
    # ht.conv_internal.laminar_T_const(): 3.66 for constant wall temperature (ht rounds to 3.66; the
    # Graetz eigenvalue gives 3.6568, Shah and London 1978).
    assert corr.laminar_nusselt(m, 1000.0, 1.0) == pytest.approx(ht.conv_internal.laminar_T_const(), abs=5e-3)


def test_leva_wall_coefficient_hand_evaluation():
    # Leva and Grummer (1948) cooling correlation, Nu = 3.50 Re_p^0.7 exp(-4.6 dp/dt), evaluated by hand at
    # Re_p = 1000, dp/dt = 0.1: 3.50 * 125.89254 * 0.63128364 = 278.159 (regression of the printed equation;
    # no worked value from the original paper was available to us).
    nu = corr.leva_cooling_wall_nusselt(m, 1000.0, 0.1)
    assert nu == pytest.approx(3.50 * 1000**0.7 * math.exp(-0.46), rel=1e-14)
    assert corr.leva_cooling_wall_nusselt(m, 1000.0, 0.1) == pytest.approx(278.159, rel=1e-5)


def test_overall_coefficient_series_resistances():
    # Analytic: with an infinitely conducting thin wall and equal films, 1/U = 1/h + 1/h.
    assert corr.overall_coefficient(m, 100.0, 100.0, 0.02, 1e-9, 1e12) == pytest.approx(50.0, rel=1e-6)
    # Wall term alone d_i ln(d_o/d_i)/(2 k) (cylindrical conduction, analytic).
    u = corr.overall_coefficient(m, 1e15, 1e15, 0.02, 0.002, 16.0)
    assert 1.0 / u == pytest.approx(0.02 * math.log(0.024 / 0.02) / 32.0, rel=1e-9)


@pytest.mark.parametrize("p", [1.0e3, 1.01325e5, 5.0e5, 30e5, 110e5, 200e5])
def test_water_saturation_against_coolprop(p):
    # CoolProp PropsSI('T', 'P', p, 'Q', 0, 'Water') (IAPWS-95); IF97 agrees within a few mK.
    cp = pytest.importorskip("CoolProp.CoolProp")
    assert corr.water_saturation_temperature(p) == pytest.approx(cp.PropsSI("T", "P", p, "Q", 0, "Water"), abs=0.02)


def test_water_saturation_at_one_atmosphere():
    # IAPWS-IF97 verification table 35 (from memory): T_sat(0.1 MPa) = 372.755919 K.
    assert corr.water_saturation_temperature(0.1e6) == pytest.approx(372.755919, abs=1e-5)


def test_out_of_range_reports_validity():
    msgs = corr.out_of_range(corr.gnielinski_nusselt, Re=(1000.0, 2e4), Pr=(0.7, 0.7))
    assert len(msgs) == 1 and "Re" in msgs[0]


@pytest.mark.parametrize("t", [300.0, 373.124, 450.0, 520.0, 560.0, 591.0, 620.0])
def test_water_saturation_pressure_and_latent_heat_against_coolprop(t):
    # CoolProp PropsSI('P', 'T', t, 'Q', 0, 'Water') and the vapour-minus-liquid enthalpy (IAPWS-95): IF97
    # Eq. 30 within 0.05 %, Watson's relation within 3 % (its stated accuracy here).
    cp = pytest.importorskip("CoolProp.CoolProp")
    p = corr.water_saturation_pressure(t)
    assert p == pytest.approx(cp.PropsSI("P", "T", t, "Q", 0, "Water"), rel=5e-4)
    assert corr.water_saturation_temperature(p) == pytest.approx(t, abs=1e-8)  # Eq. 30 and Eq. 31 invert
    h_fg = cp.PropsSI("H", "T", t, "Q", 1, "Water") - cp.PropsSI("H", "T", t, "Q", 0, "Water")
    assert corr.water_latent_heat(t) == pytest.approx(h_fg, rel=0.03)

"""Heat-capacity polynomials against published data and a reference library."""

import pytest
from tubewright.models.backend import NUMPY as m
from tubewright.models.thermo import ConstantCp, Nasa7, Shomate, Species, cp_problem

CP = pytest.importorskip("CoolProp.CoolProp")

# N2, NIST Chemistry WebBook Shomate coefficients (Chase, NIST-JANAF Thermochemical Tables, 1998).
N2_SHOMATE = Shomate((
    (100.0, 500.0, (28.98641, 1.853978, -9.647459, 16.63537, 0.000117, -8.671914, 226.4168, 0.0)),
    (500.0, 2000.0, (19.50583, 19.88705, -8.598535, 1.369784, 0.527601, -4.935202, 212.3900, 0.0)),
))
# N2, GRI-Mech 3.0 thermodynamic data (Smith et al., 1999), NASA 7-coefficient form.
N2_NASA = Nasa7(
    low=(3.298677, 1.4082404e-3, -3.963222e-6, 5.641515e-9, -2.444854e-12, -1020.8999, 3.950372),
    high=(2.92664, 1.4879768e-3, -5.68476e-7, 1.0097038e-10, -6.753351e-15, -922.7977, 5.980528),
    t_mid=1000.0, t_min=300.0, t_max=5000.0,
)


def _coolprop_cp0(T):
    # CoolProp ideal-gas isobaric heat capacity of nitrogen (Span et al. 2000 equation of state).
    return CP.PropsSI("CP0MOLAR", "T", T, "P", 1e5, "Nitrogen")


@pytest.mark.parametrize("T", [300.0, 500.0, 800.0, 1200.0, 1800.0])
def test_n2_shomate_and_nasa_against_coolprop(T):
    ref = _coolprop_cp0(T)
    assert N2_SHOMATE.cp(m, T) == pytest.approx(ref, rel=3e-3)
    assert N2_NASA.cp(m, T) == pytest.approx(ref, rel=3e-3)


def test_n2_standard_entropy_and_enthalpy_of_polynomials():
    # NIST-JANAF (Chase 1998): S°(298.15 K) of N2 = 191.61 J/(mol K); H(298.15) - H(298.15) = 0 by definition.
    assert N2_SHOMATE.s_poly(m, 298.15) == pytest.approx(191.61, abs=0.02)
    assert N2_SHOMATE.h_poly(m, 298.15) == pytest.approx(0.0, abs=0.1)
    assert N2_NASA.s_poly(m, 298.15) == pytest.approx(191.61, abs=0.2)


def test_enthalpy_is_integral_of_cp():
    # Analytic: dH/dT = cp, checked by a central difference on both polynomial forms.
    for model in (N2_SHOMATE, N2_NASA):
        sp = Species("N2", 0.028, 0.0, model)
        for T in (400.0, 900.0, 1500.0):
            h = 1e-3
            dh = (sp.enthalpy(m, T + h) - sp.enthalpy(m, T - h)) / (2 * h)
            assert dh == pytest.approx(model.cp(m, T), rel=1e-6)


def test_nonphysical_cp_is_reported():
    assert cp_problem(ConstantCp(-5.0)) is not None
    assert cp_problem(ConstantCp(30.0, t_min=500.0, t_max=400.0)) is not None
    assert cp_problem(N2_SHOMATE) is None

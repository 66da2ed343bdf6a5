"""Transport correlations, one function each, written against the math backend ``m``.

Each function's ``validity`` attribute holds its validity ranges as data; ``out_of_range`` turns them into
warnings at the states a simulation visited. SI units for every argument.
"""

from __future__ import annotations


def _valid(**ranges):
    def mark(fn):
        fn.validity = ranges
        return fn

    return mark


@_valid(Re=(1.0, 1.0e8), roughness_ratio=(0.0, 0.05))
def churchill_1977_friction(m, Re, roughness_ratio):
    """Darcy friction factor for pipe flow in all regimes (Churchill, Chem. Eng. 84(24), 1977, 91-92):

        f = 8 [ (8/Re)^12 + (A + B)^(-3/2) ]^(1/12)
        A = [2.457 ln(1 / ((7/Re)^0.9 + 0.27 e/D))]^16,   B = (37530/Re)^16

    Re = rho u D / mu [-], roughness_ratio = e/D [-]. Smooth across laminar, transitional and turbulent flow
    (which the collocation model needs); within about 1-2 % of Colebrook in turbulent flow."""
    a = (2.457 * m.log(1.0 / ((7.0 / Re) ** 0.9 + 0.27 * roughness_ratio))) ** 16
    b = (37530.0 / Re) ** 16
    return 8.0 * ((8.0 / Re) ** 12 + (a + b) ** -1.5) ** (1.0 / 12.0)


@_valid(Re=(3000.0, 5.0e6))
def petukhov_friction(m, Re):
    """Darcy friction factor of smooth tubes used inside Gnielinski's correlation (Petukhov, 1970):
    f = (0.790 ln Re - 1.64)^-2 [-], 3000 < Re < 5e6."""
    return (0.790 * m.log(Re) - 1.64) ** -2


@_valid(Re_p=(1.0, 1.0e4), voidage=(0.3, 0.6))
def ergun_pressure_gradient(m, mass_flux, density, viscosity, particle_diameter, voidage):
    """Frictional pressure gradient of a packed bed [Pa/m] (Ergun, Chem. Eng. Prog. 48, 1952, 89-94):

        -dP/dz = 150 mu (1-e)^2 u / (e^3 d_p^2) + 1.75 rho (1-e) u^2 / (e^3 d_p),   u = G/rho

    mass_flux G [kg/(m^2 s)] on the empty cross-section, density [kg/m^3], viscosity [Pa s],
    particle_diameter [m] (equivalent sphere), voidage [-]. Typical accuracy +-25 % for random packings."""
    u = mass_flux / density
    e = voidage
    return 150.0 * viscosity * (1 - e) ** 2 * u / (e**3 * particle_diameter**2) + 1.75 * density * (
        1 - e
    ) * u**2 / (e**3 * particle_diameter)


@_valid(Re=(1.0, 1.0e8))
def darcy_weisbach_gradient(m, friction_factor, mass_flux, density, diameter):
    """Frictional pressure gradient of pipe flow [Pa/m]: -dP/dz = f rho u^2 / (2 D), u = G/rho
    (Darcy-Weisbach; f is the Darcy friction factor)."""
    u = mass_flux / density
    return friction_factor * density * u**2 / (2.0 * diameter)


@_valid(Re=(2300.0, 5.0e6), Pr=(0.5, 2000.0))
def gnielinski_nusselt(m, Re, Pr, friction_factor):
    """Turbulent and transitional tube-side Nusselt number (Gnielinski, Int. Chem. Eng. 16, 1976, 359-368):

        Nu = (f/8)(Re - 1000) Pr / (1 + 12.7 (f/8)^(1/2) (Pr^(2/3) - 1))

    with f the Darcy friction factor (Petukhov's for smooth tubes). 2300 < Re < 5e6, 0.5 < Pr < 2000;
    about +-10 % against data."""
    f8 = friction_factor / 8.0
    return f8 * (Re - 1000.0) * Pr / (1.0 + 12.7 * m.sqrt(f8) * (Pr ** (2.0 / 3.0) - 1.0))


@_valid(Re=(1.0e4, 1.2e5), Pr=(0.7, 120.0))
def dittus_boelter_nusselt(m, Re, Pr, heating: bool):
    """Dittus-Boelter (1930, as restated by McAdams): Nu = 0.023 Re^0.8 Pr^n, n = 0.4 when the fluid is
    heated, 0.3 when it is cooled. 1e4 < Re < 1.2e5, 0.7 < Pr < 120, L/D > 10; +-25 %."""
    return 0.023 * Re**0.8 * Pr ** (0.4 if heating else 0.3)


@_valid(Re=(0.0, 2300.0))
def laminar_nusselt(m, Re, Pr):
    """Fully developed laminar flow in a tube at constant wall temperature: Nu = 3.657 (Graetz problem,
    analytic; e.g. Shah and London, 1978). Re < 2300."""
    return 3.657 + 0.0 * Re


@_valid(Re_p=(250.0, 3000.0), dp_dt=(0.05, 0.3))
def leva_cooling_wall_nusselt(m, Re_p, dp_dt):
    """Overall bed-to-wall coefficient of a packed tube that is cooled through its wall (Leva and Grummer,
    Chem. Eng. Prog. 44, 1948, 707; also Leva, Ind. Eng. Chem. 39, 1947, 857, for heating):

        Nu_t = h d_t / k_f = 3.50 Re_p^0.7 exp(-4.6 d_p/d_t),   Re_p = d_p G / mu

    k_f is the fluid conductivity [W/(m K)], d_p/d_t the particle-to-tube diameter ratio [-]. The validity
    ranges here are from memory of the original data (spheres and cylinders in 1-2 inch tubes, air)."""
    return 3.50 * Re_p**0.7 * m.exp(-4.6 * dp_dt)


def overall_coefficient(m, h_inside, h_outside, inner_diameter, wall_thickness, wall_conductivity):
    """Overall coefficient based on the inner tube area [W/(m^2 K)], resistances in series (textbook):

        1/U = 1/h_i + d_i ln(d_o/d_i) / (2 k_w) + d_i / (d_o h_o),   d_o = d_i + 2 t_w"""
    d_o = inner_diameter + 2.0 * wall_thickness
    wall = inner_diameter * m.log(d_o / inner_diameter) / (2.0 * wall_conductivity)
    return 1.0 / (1.0 / h_inside + wall + inner_diameter / (d_o * h_outside))


_IF97_N = (
    0.11670521452767e4, -0.72421316598310e6, -0.17073846940092e2, 0.12020824702470e5, -0.32325550322333e7,
    0.14915108613530e2, -0.48232657361591e4, 0.40511340542057e6, -0.23855557567849, 0.65017534844798e3,
)


def water_saturation_temperature(pressure, m=None):
    """Saturation temperature of water [K] from its pressure [Pa]: the backward equation of IAPWS-IF97,
    region 4, Eq. (31) (Wagner et al., J. Eng. Gas Turbines Power 122, 2000, 150-182).
    Valid 611.213 Pa <= p <= 22.064 MPa; consistent with IAPWS-95 within a few mK. With a math backend
    ``m`` the same formula gives a Pyomo expression (the steam pressure as a design variable); the range
    is then kept by the design bounds."""
    if m is None:
        import math

        if not (611.213 <= pressure <= 22.064e6):
            raise ValueError(f"water saturation pressure {pressure} Pa outside 611.213 Pa .. 22.064 MPa")
        sqrt = math.sqrt
    else:
        sqrt = m.sqrt
    n = _IF97_N
    beta = (pressure / 1.0e6) ** 0.25
    e = beta**2 + n[2] * beta + n[5]
    f = n[0] * beta**2 + n[3] * beta + n[6]
    g = n[1] * beta**2 + n[4] * beta + n[7]
    d = 2.0 * g / (-f - sqrt(f * f - 4.0 * e * g))
    return 0.5 * (n[9] + d - sqrt((n[9] + d) ** 2 - 4.0 * (n[8] + n[9] * d)))


def water_saturation_pressure(temperature: float) -> float:
    """Saturation pressure of water [Pa] from its temperature [K]: the basic equation of IAPWS-IF97,
    region 4, Eq. (30) (Wagner et al., J. Eng. Gas Turbines Power 122, 2000, 150-182), the inverse of
    ``water_saturation_temperature``. Valid 273.15 K <= T <= 647.096 K."""
    import math

    if not (273.15 <= temperature <= 647.096):
        raise ValueError(f"water saturation temperature {temperature} K outside 273.15 .. 647.096 K")
    n = _IF97_N
    theta = temperature + n[8] / (temperature - n[9])
    a = theta**2 + n[0] * theta + n[1]
    b = n[2] * theta**2 + n[3] * theta + n[4]
    c = n[5] * theta**2 + n[6] * theta + n[7]
    return 1.0e6 * (2.0 * c / (-b + math.sqrt(b * b - 4.0 * a * c))) ** 4


def water_latent_heat(temperature: float) -> float:
    """Enthalpy of vaporisation of water [J/kg] at a saturation temperature [K] by Watson's relation
    (Watson, Ind. Eng. Chem. 35, 1943, 398-406): dh = dh_b ((1 - T/Tc) / (1 - T_b/Tc))^0.38, anchored at the
    normal boiling point (T_b = 373.124 K, dh_b = 2256.4 kJ/kg, from memory of the steam tables) with
    Tc = 647.096 K (IAPWS). Within 3 % of IAPWS-95 from 300 K to 620 K (checked against CoolProp
    in the tests); it is used for the steam raised by a boiling-water coolant."""
    t_c, t_b, dh_b = 647.096, 373.124, 2.2564e6
    if not (273.15 <= temperature < t_c):
        raise ValueError(f"temperature {temperature} K outside 273.15 .. 647.096 K")
    return dh_b * ((1.0 - temperature / t_c) / (1.0 - t_b / t_c)) ** 0.38


def out_of_range(fn, **values) -> list[str]:
    """Messages for each argument of ``fn`` whose visited range [min, max] leaves fn.validity."""
    out = []
    for name, (lo, hi) in fn.validity.items():
        if name not in values:
            continue
        vmin, vmax = values[name]
        if vmin < lo or vmax > hi:
            out.append(f"{fn.__name__}: {name} spans {vmin:.4g}..{vmax:.4g}, validity range {lo:.4g}..{hi:.4g}")
    return out

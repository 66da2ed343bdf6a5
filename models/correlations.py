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


SHAPE_FACTORS = {"sphere": 1.25, "cylinder": 2.5}  # Zehner-Schluender form factor C_f (from memory)


@_valid(voidage=(0.26, 0.7), conductivity_ratio=(1.0, 1.0e4))
def zehner_schlunder_1970_static_conductivity(m, fluid_conductivity, solid_conductivity, voidage, shape_factor):
    """Stagnant effective conductivity of a packed bed [W/(m K)], without radiation and flow (Zehner and
    Schluender, Chem. Ing. Tech. 42, 1970, 933-941; restated in the VDI Heat Atlas):

        k0/k_f = 1 - sqrt(1-e) + 2 sqrt(1-e) / (1 - B/kappa) *
                 [ (1 - 1/kappa) B / (1 - B/kappa)^2 ln(kappa/B) - (B+1)/2 - (B-1)/(1 - B/kappa) ]
        kappa = k_s/k_f,   B = C_f ((1-e)/e)^(10/9),   C_f = 1.25 spheres, 2.5 cylinders

    fluid_conductivity k_f and solid_conductivity k_s [W/(m K)], voidage e [-]. It gives k0 = k_f when
    kappa = 1 (checked in the tests) and lies between the series and parallel bounds. The form factors and
    ranges are from memory; about +-30 % against stagnant-bed data."""
    kappa = solid_conductivity / fluid_conductivity
    b = shape_factor * ((1.0 - voidage) / voidage) ** (10.0 / 9.0)
    root = m.sqrt(1.0 - voidage)
    nb = 1.0 - b / kappa
    core = (1.0 - 1.0 / kappa) * b / nb**2 * m.log(kappa / b) - (b + 1.0) / 2.0 - (b - 1.0) / nb
    return fluid_conductivity * (1.0 - root + 2.0 * root / nb * core)


@_valid(Re_p=(10.0, 2000.0), dp_dt=(0.05, 0.3))
def specchia_1980_radial_conductivity(m, static_conductivity, fluid_conductivity, Re_p, Pr, dp_dt):
    """Effective radial conductivity of a packed bed with flow [W/(m K)] (Specchia, Baldi and Sicardi, Chem.
    Eng. Commun. 4, 1980, 361-380; the flow term in the Bauer-Schluender form):

        lambda_er = k0 + k_f Re_p Pr / (8.65 (1 + 19.4 (d_p/d_t)^2))

    static_conductivity k0 [W/(m K)] (zehner_schlunder_1970_static_conductivity), k_f [W/(m K)],
    Re_p = d_p G / mu and Pr = cp mu / k_f [-], dp_dt = d_p/d_t [-]. Constants and ranges from memory;
    about +-20 % in the published comparisons."""
    return static_conductivity + fluid_conductivity * Re_p * Pr / (8.65 * (1.0 + 19.4 * dp_dt**2))


LI_FINLAYSON = {"sphere": (0.17, 0.79), "cylinder": (0.16, 0.93)}  # (a, b) of Nu_w = a Re_p^b (from memory)


@_valid(Re_p=(20.0, 7600.0), dp_dt=(0.05, 0.3))
def li_finlayson_1977_wall_coefficient(m, Re_p, fluid_conductivity, particle_diameter, shape="sphere"):
    """Wall heat-transfer coefficient alpha_w [W/(m^2 K)] of the two-dimensional packed-bed model (Li and
    Finlayson, Chem. Eng. Sci. 32, 1977, 1055-1066, their re-evaluation of earlier data with the
    lambda_er/alpha_w model):

        alpha_w d_p / k_f = 0.17 Re_p^0.79 (spheres, 20 < Re_p < 7600),  0.16 Re_p^0.93 (cylinders, 20-800)

    Re_p = d_p G / mu [-], k_f [W/(m K)], d_p [m]; 0.05 < d_p/d_t < 0.3. Constants from memory; the scatter
    of wall coefficients is large (+-40 %), which is why the 2-D check is a screening estimate."""
    a, b = LI_FINLAYSON[shape]
    return a * Re_p**b * fluid_conductivity / particle_diameter


@_valid(Re_p=(10.0, 5000.0), dp_dt=(0.0, 0.3))
def fahien_smith_1955_radial_dispersion(m, superficial_velocity, particle_diameter, dp_dt):
    """Effective radial mass dispersivity of a packed bed [m^2/s] on the whole cross-section (Fahien and Smith,
    AIChE J. 1, 1955, 28-37, in the form quoted by Froment and Bischoff):

        Pe_mr = u_s d_p / D_er = 8 (1 + 19.4 (d_p/d_t)^2)

    superficial_velocity u_s [m/s], d_p [m], dp_dt [-]. Turbulent (Re_p above about 10-100), where molecular
    diffusion adds little; constants from memory."""
    return superficial_velocity * particle_diameter / (8.0 * (1.0 + 19.4 * dp_dt**2))


def lumped_wall_coefficient(m, alpha_w, lambda_er, tube_diameter):
    """The one-dimensional bed-side coefficient equivalent to (alpha_w, lambda_er) [W/(m^2 K)] (Froment and
    Bischoff, Chemical Reactor Analysis and Design, 2nd ed., 1990, chapter on fixed-bed reactors; the chapter
    from memory):

        1/h = 1/alpha_w + d_t / (8 lambda_er)

    exact to first order in the radial Biot number alpha_w d_t / (2 lambda_er) (the first eigenvalue of the
    Bessel series); used so that the 1-D and 2-D models share their data."""
    return 1.0 / (1.0 / alpha_w + tube_diameter / (8.0 * lambda_er))


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

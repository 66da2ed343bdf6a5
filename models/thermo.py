"""Species and their ideal-gas (or constant-property liquid) thermochemistry.

Every species carries a heat-capacity model with ``cp(m, T)``, ``enthalpy(m, T)`` and ``entropy(m, T)``
written against the math backend ``m`` (see ``models.backend``). Enthalpies include the heat of formation,
so that heats of reaction follow from Kirchhoff's law: dH_r/dT = sum_i nu_i cp_i.
All values SI: T in K, cp in J/(mol K), enthalpy in J/mol, entropy in J/(mol K).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from .backend import NUMPY as _NP

R_GAS = 8.314462618  # J/(mol K), CODATA 2018 exact value
T_STD = 298.15  # K, thermochemical reference temperature
P_STD = 1.0e5  # Pa, standard-state pressure (1 bar)


@dataclass(frozen=True)
class ConstantCp:
    """cp = const; H(T) - H(T0) = cp (T - T0); S(T) - S(T0) = cp ln(T/T0). Valid over [t_min, t_max]."""

    value: float
    t_min: float = 200.0
    t_max: float = 3000.0

    def cp(self, m, T):
        return self.value + 0.0 * T

    def h_poly(self, m, T):
        return self.value * T

    def s_poly(self, m, T):
        return self.value * m.log(T)


@dataclass(frozen=True)
class Nasa7:
    """NASA 7-coefficient polynomials (two ranges split at ``t_mid``), the form of Gordon and McBride,
    NASA SP-273 (1971) and NASA RP-1311 (1994):

        cp/R = a1 + a2 T + a3 T^2 + a4 T^3 + a5 T^4
        H/(R T) = a1 + a2 T/2 + a3 T^2/3 + a4 T^3/4 + a5 T^4/5 + a6/T
        S/R = a1 ln T + a2 T + a3 T^2/2 + a4 T^3/3 + a5 T^4/4 + a7

    ``low`` applies on [t_min, t_mid], ``high`` on [t_mid, t_max]; each is a sequence of 7 coefficients."""

    low: tuple
    high: tuple
    t_mid: float = 1000.0
    t_min: float = 300.0
    t_max: float = 5000.0

    @staticmethod
    def _cp(a, T):
        return R_GAS * (a[0] + T * (a[1] + T * (a[2] + T * (a[3] + T * a[4]))))

    @staticmethod
    def _h(a, m, T):
        return R_GAS * (T * (a[0] + T * (a[1] / 2 + T * (a[2] / 3 + T * (a[3] / 4 + T * a[4] / 5)))) + a[5])

    @staticmethod
    def _s(a, m, T):
        return R_GAS * (a[0] * m.log(T) + T * (a[1] + T * (a[2] / 2 + T * (a[3] / 3 + T * a[4] / 4))) + a[6])

    def cp(self, m, T):
        return m.where(T <= self.t_mid, self._cp(self.low, T), self._cp(self.high, T))

    def h_poly(self, m, T):
        return m.where(T <= self.t_mid, self._h(self.low, m, T), self._h(self.high, m, T))

    def s_poly(self, m, T):
        return m.where(T <= self.t_mid, self._s(self.low, m, T), self._s(self.high, m, T))


@dataclass(frozen=True)
class Shomate:
    """Shomate equations as tabulated in the NIST Chemistry WebBook (Chase, NIST-JANAF Tables, 1998),
    with t = T/1000:

        cp = A + B t + C t^2 + D t^3 + E/t^2                          [J/(mol K)]
        H - H(298.15) = A t + B t^2/2 + C t^3/3 + D t^4/4 - E/t + F - H   [kJ/mol]
        S = A ln t + B t + C t^2/2 + D t^3/3 - E/(2 t^2) + G           [J/(mol K)]

    ``ranges`` is a sequence of (t_low, t_high, (A, B, C, D, E, F, G, H)) in ascending, touching order."""

    ranges: tuple

    @property
    def t_min(self):
        return self.ranges[0][0]

    @property
    def t_max(self):
        return self.ranges[-1][1]

    @staticmethod
    def _cp(c, T):
        t = T / 1000.0
        return c[0] + t * (c[1] + t * (c[2] + t * c[3])) + c[4] / t**2

    @staticmethod
    def _h(c, m, T):
        t = T / 1000.0
        return 1000.0 * (t * (c[0] + t * (c[1] / 2 + t * (c[2] / 3 + t * c[3] / 4))) - c[4] / t + c[5] - c[7])

    @staticmethod
    def _s(c, m, T):
        t = T / 1000.0
        return c[0] * m.log(t) + t * (c[1] + t * (c[2] / 2 + t * c[3] / 3)) - c[4] / (2 * t**2) + c[6]

    def _piecewise(self, fn, m, T):
        expr = fn(self.ranges[-1][2], T) if fn is self._cp else fn(self.ranges[-1][2], m, T)
        for _, hi, c in reversed(self.ranges[:-1]):
            piece = fn(c, T) if fn is self._cp else fn(c, m, T)
            expr = m.where(T <= hi, piece, expr)
        return expr

    def cp(self, m, T):
        return self._piecewise(self._cp, m, T)

    def h_poly(self, m, T):
        return self._piecewise(self._h, m, T)

    def s_poly(self, m, T):
        return self._piecewise(self._s, m, T)


@dataclass(frozen=True)
class Species:
    """A species: name, element counts (may be empty), molar mass [kg/mol], heat of formation at 298.15 K
    [J/mol], standard entropy at 298.15 K and 1 bar [J/(mol K)] (None if unknown), heat-capacity model."""

    name: str
    molar_mass: float
    heat_of_formation: float
    cp_model: object
    elements: dict = field(default_factory=dict)
    entropy: float | None = None

    def cp(self, m, T):
        return self.cp_model.cp(m, T)

    @cached_property
    def _anchors(self) -> tuple[float, float]:
        return float(self.cp_model.h_poly(_NP, T_STD)), float(self.cp_model.s_poly(_NP, T_STD))

    def enthalpy(self, m, T):
        """H(T) = H_f(298.15) + integral of cp from 298.15 K to T, in J/mol."""
        return self.heat_of_formation + self.cp_model.h_poly(m, T) - self._anchors[0]

    def entropy_at(self, m, T):
        """S°(T) = S°(298.15) + integral of cp/T from 298.15 K to T, in J/(mol K) (standard pressure)."""
        if self.entropy is None:
            raise ValueError(f"species {self.name} has no standard entropy")
        return self.entropy + self.cp_model.s_poly(m, T) - self._anchors[1]


def cp_problem(model) -> str | None:
    """A reason why a cp model is non-physical on its validity range, or None.

    Checks t_min < t_max and cp > 0 on a fine grid of the range (positivity of cp is a law of
    thermodynamics for a stable phase)."""
    if not (model.t_min > 0 and model.t_max > model.t_min):
        return f"temperature range [{model.t_min}, {model.t_max}] K is empty or not above 0 K"
    grid = np.linspace(model.t_min, model.t_max, 400)
    cp = np.asarray(model.cp(_NP, grid), dtype=float)
    if not np.all(np.isfinite(cp)) or np.any(cp <= 0.0):
        bad = grid[np.argmax(~np.isfinite(cp) | (cp <= 0.0))]
        return f"cp is not positive at {bad:.1f} K within its range [{model.t_min}, {model.t_max}] K"
    return None


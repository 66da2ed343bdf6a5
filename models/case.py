"""The validated case: every quantity SI, every choice checked. Built by ``models.casefile.load_case``."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property

from .coolant_modes import COOLANT_MODES, CoolantMode

INSIDE_CORRELATIONS = ("gnielinski", "dittus_boelter", "laminar", "leva", "radial_lumped")


@dataclass(frozen=True)
class Tube:
    inner_diameter: float  # m
    length: float  # m
    count: int
    wall_thickness: float = 2.0e-3  # m
    wall_conductivity: float = 16.0  # W/(m K), stainless steel (common practice)
    roughness: float = 4.5e-5  # m, drawn steel (common practice)

    @property
    def area(self) -> float:
        return math.pi * self.inner_diameter**2 / 4.0


@dataclass(frozen=True)
class Bed:
    particle_diameter: float  # m
    voidage: float  # -
    density: float  # bulk bed density, kg catalyst per m^3 of bed


@dataclass(frozen=True)
class Feed:
    molar_flows: tuple  # mol/s for the whole reactor, in species order
    temperature: float  # K
    pressure: float  # Pa
    viscosity: float | None = None  # Pa s
    thermal_conductivity: float | None = None  # W/(m K)
    density: float | None = None  # kg/m^3 (liquid phase)
    diffusivity: float | None = None  # m^2/s, of the key reactant (axial-dispersion check, laminar flow)


@dataclass(frozen=True)
class Coolant:
    mode: str
    temperature: float | None = None  # K: constant or inlet value
    mass_flow: float | None = None  # kg/s for the whole shell
    cp: float | None = None  # J/(kg K)
    pressure: float | None = None  # Pa (boiling water)

    @cached_property
    def kind(self) -> CoolantMode:
        """The row of the coolant-mode table (models.coolant_modes) for this mode."""
        return COOLANT_MODES[self.mode]


@dataclass(frozen=True)
class HeatTransfer:
    overall: float | None = None  # W/(m^2 K) on the inner area; None = from correlations
    inside: str | None = None
    outside: float | None = None  # coolant-side coefficient, W/(m^2 K)
    multiplier: float = 1.0  # scales U (uncertainty studies)


@dataclass(frozen=True)
class Numerics:
    rtol: float = 1.0e-7
    atol: float = 1.0e-10
    method: str = "LSODA"  # switches between Adams and BDF by stiffness; gets the Jacobian
    temperature_ceiling: float = 1500.0  # K
    min_pressure: float = 1.0e3  # Pa
    finite_elements: int = 40  # collocation model
    collocation_points: int = 3
    verify_tolerance: float = 0.01  # largest relative deviation of the optimum from the integrator
    # IPOPT's linear solver MUMPS (DesignProblem.linear_solver_options; measured in bench_linear_solver.py)
    mumps_pivot_order: int = 7  # fill-reducing ordering: MUMPS's automatic choice
    mumps_scaling: int = 77  # row/column scaling: MUMPS's automatic choice
    mumps_permuting_scaling: int = 0  # no permutation with scaling (the automatic one fails on large meshes)
    mumps_mem_percent: int = 1000  # MUMPS work-space increase (%) over its estimate; IPOPT's default


@dataclass(frozen=True)
class Radial:
    """Data of the two-dimensional (radial) model, [radial] in the case file. A given value wins over its
    correlation (models.correlations); models.balances.radial_transport resolves them along the tube."""

    points: int = 6  # interior radial collocation points (models.radial_grid)
    particle_shape: str = "sphere"  # "sphere" or "cylinder": form factors of the packed-bed correlations
    solid_conductivity: float | None = None  # W/(m K), catalyst pellet: static conductivity of the bed
    lambda_er: float | None = None  # W/(m K), effective radial conductivity
    alpha_w: float | None = None  # W/(m^2 K), wall coefficient of the bed (the wall and coolant side added)
    dispersion: float | None = None  # m^2/s, effective radial dispersivity on the whole cross-section


@dataclass(frozen=True)
class Case:
    source: str
    title: str
    phase: str  # "gas" or "liquid"
    species: tuple  # of thermo.Species
    reactions: tuple  # of reactions.Reaction
    key_reactant: str
    product: str | None
    feed: Feed
    tube: Tube
    bed: Bed | None
    coolant: Coolant
    heat_transfer: HeatTransfer
    numerics: Numerics
    limits: dict = field(default_factory=dict)  # name -> SI value
    radial: Radial | None = None  # [radial]: data of the two-dimensional model
    raw: dict = field(default_factory=dict)  # the merged TOML tables ([design], [goal] ... are read elsewhere)

    @property
    def names(self) -> list[str]:
        return [s.name for s in self.species]

    @property
    def species_map(self) -> dict:
        return {s.name: s for s in self.species}

    def index(self, name: str) -> int:
        return self.names.index(name)

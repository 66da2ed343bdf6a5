"""The state layout: the one place that knows where each state of the axial balances sits.

The state of one tube at one axial position is y = [F_1 .. F_n, T, P, Tc, Q, tau]:

    F_i  molar flow of species i per tube      mol/s
    T    fluid temperature                     K
    P    pressure                              Pa
    Tc   coolant temperature                   K
    Q    heat to the coolant, whole reactor    W
    tau  residence time in the fluid volume    s

An array of states may carry trailing axes (a sample axis for batches, an axial axis for profiles): every
method here indexes the first axis only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

TAIL = ("T", "P", "Tc", "Q", "tau")  # the states after the species flows, in this order
TAIL_UNITS = {"T": "K", "P": "Pa", "Tc": "K", "Q": "W", "tau": "s"}  # unit suffix of profile columns


@dataclass(frozen=True)
class StateLayout:
    species: tuple  # species names, in the case's order

    @classmethod
    def of(cls, case) -> StateLayout:
        return cls(tuple(case.names))

    @property
    def size(self) -> int:
        return len(self.species) + len(TAIL)

    @property
    def names(self) -> tuple:
        return (*(f"F_{s}" for s in self.species), *TAIL)

    @property
    def flows(self) -> slice:
        return slice(0, len(self.species))

    def index(self, state: str) -> int:
        """Position of a tail state ("T", "P", "Tc", "Q", "tau") or of a species flow ("F_A")."""
        if state in TAIL:
            return len(self.species) + TAIL.index(state)
        return self.names.index(state)

    def column(self, state: str) -> str:
        """Name of the profile column of a state (SI unit in the name; flows are for the whole reactor)."""
        if state in TAIL:
            return f"{state}_{TAIL_UNITS[state]}"
        return f"F_{state}_mol_s" if state in self.species else f"{state}_mol_s"

    def get(self, y, state: str):
        return y[self.index(state)]

    def pack(self, derivatives, shape=()) -> np.ndarray:
        """The derivatives (balances.Derivatives) as one array in layout order, broadcast to ``shape`` (the
        trailing axes of the state)."""
        parts = [*derivatives.dF, *derivatives.tail_values()]
        if not shape:
            return np.array(parts)
        return np.array([np.broadcast_to(p, shape) for p in parts])

    def initial(self, case, coolant_start: float | None = None, samples: int | None = None) -> np.ndarray:
        """The inlet state per tube (shape (size,), or (size, samples) when the case carries arrays of
        samples). The coolant temperature at z = 0 is ``coolant_start`` when given (counter-current shooting),
        else the case's coolant temperature, else the feed temperature (no coolant)."""
        tc = case.coolant.temperature if coolant_start is None else coolant_start
        if tc is None:
            tc = case.feed.temperature
        shape = () if samples is None else (samples,)
        y = np.zeros((self.size, *shape))
        n_tubes = case.tube.count
        for i, f in enumerate(case.feed.molar_flows):
            y[i] = np.broadcast_to(f, shape) / n_tubes
        for state, value in (("T", case.feed.temperature), ("P", case.feed.pressure), ("Tc", tc)):
            y[self.index(state)] = np.broadcast_to(value, shape)
        return y

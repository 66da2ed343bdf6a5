"""Error types for bad input. Each names the file, the key and what is allowed."""

from __future__ import annotations

import difflib


class CaseError(ValueError):
    """A case file (or a value inside one) is not acceptable.

    ``source`` is the file, ``key`` the dotted key (for example ``tube.inner_diameter``)."""

    def __init__(self, source: str, key: str, message: str):
        self.source = str(source)
        self.key = key
        self.detail = message
        where = f"{self.source}: [{key}]" if key else self.source
        super().__init__(f"{where}: {message}")


def suggest(word: str, choices) -> str:
    """' (did you mean "x"?)' for the nearest allowed word, or an empty string."""
    near = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f' (did you mean "{near[0]}"?)' if near else ""


class ComputationFailed(RuntimeError):
    """A computation ran on valid input but could not produce its result (the nominal design problem does
    not solve, a starting design cannot be simulated). Not bad input: the command line exits with 1."""

    def __init__(self, code, message: str):
        self.code = code  # a models.outcomes.Reason
        super().__init__(message)


def option_error(option: str, message: str) -> CaseError:
    """Bad input on the command line (or in a verb's arguments): the one input error type, naming the option."""
    return CaseError("command line", option, message)

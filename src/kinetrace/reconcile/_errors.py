"""Error types raised by :mod:`kinetrace.reconcile` (all derive from KinetraceError)."""

from __future__ import annotations

from kinetrace.errors import KinetraceError


class ReconciliationError(KinetraceError):
    """Inputs to a reconciliation are inconsistent (shapes, sigmas, constraint matrices)."""


class UnobservableError(ReconciliationError):
    """The measured variables cannot determine some required unknowns (e.g. reaction extents).

    Attributes
    ----------
    unknowns : list of str
        Names of the unknowns that cannot be determined.
    """

    def __init__(self, message: str, unknowns: list[str] | None = None):
        super().__init__(message)
        self.unknowns = list(unknowns or [])


class ConvergenceError(ReconciliationError):
    """Successive linearisation did not converge at some time steps.

    Attributes
    ----------
    steps : ndarray of int
        Indices of the time steps that did not converge.
    """

    def __init__(self, message: str, steps=None):
        super().__init__(message)
        self.steps = steps

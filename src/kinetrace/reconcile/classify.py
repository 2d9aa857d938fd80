"""Classification of variables: redundant / non-redundant measured, observable /
unobservable unmeasured (Crowe, Garcia Campos & Hrymak 1983)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._errors import ReconciliationError, UnobservableError
from ._kernel import NULL_TOL, _projection


@dataclass(frozen=True)
class Classification:
    """Structural classification of the variables of one constraint set.

    Attributes
    ----------
    redundant : ndarray (n,) of bool
        Measured variables whose column of ``P A_y`` is non-zero: they can be computed
        from the other measurements and are adjusted by reconciliation.
    observable : ndarray (nz,) of bool
        Unmeasured variables uniquely determined by the measurements.
    dof : int
        Rank of ``P A_y``: degrees of freedom of the global test.
    names, unknown_names : tuple of str
        Labels.
    projection : ndarray (p, m)
        ``P`` with orthonormal rows and ``P A_z = 0``.
    """

    redundant: np.ndarray
    observable: np.ndarray
    dof: int
    names: tuple
    unknown_names: tuple
    projection: np.ndarray

    @property
    def nonredundant_names(self) -> list[str]:
        """Measured but just-determined variables (never adjusted, never testable)."""
        return [nm for nm, r in zip(self.names, self.redundant) if not r]

    @property
    def unobservable_names(self) -> list[str]:
        """Unmeasured variables the measurements cannot determine."""
        return [nm for nm, o in zip(self.unknown_names, self.observable) if not o]

    def require_observable(self, which=None, what="unknowns"):
        """Raise :class:`UnobservableError` if any of ``which`` (names; default all) is unobservable."""
        want = set(self.unknown_names if which is None else which)
        missing = [nm for nm in self.unobservable_names if nm in want]
        if missing:
            others = [nm for nm in self.unknown_names if nm not in want]
            hint = (f"Measure more of the unmeasured variables ({', '.join(others)}) or reduce "
                    f"the unknowns (e.g. fewer independent reactions)" if others else
                    "Reduce the unknowns (e.g. fewer independent reactions)")
            raise UnobservableError(
                f"the measured variables cannot determine the {what} {', '.join(missing)}: "
                f"the balances leave {len(missing)} of them free. {hint}",
                missing,
            )
        return self


def classify_variables(A_y, A_z=None, names=None, unknown_names=None) -> Classification:
    """Classify the variables of the constraints ``A_y x + A_z z = b``.

    Parameters
    ----------
    A_y : array_like (m, n)
        Coefficients of the measured variables.
    A_z : array_like (m, nz), optional
        Coefficients of the unmeasured variables.
    names, unknown_names : sequence of str, optional
        Labels.

    Returns
    -------
    Classification

    References
    ----------
    .. [1] Crowe, C. M., Garcia Campos, Y. A., Hrymak, A. (1983). Reconciliation of
       process flow rates by matrix projection. Part I: linear case. AIChE J. 29(6),
       881-888. (zero columns of P A_y: non-redundant; null space of A_z: unobservable)

    Examples
    --------
    Chain F1 -> node -> F2 -> node -> F3 with F2 unmeasured: F1 and F3 stay redundant.

    >>> c = classify_variables([[1.0, 0.0], [0.0, -1.0]], [[-1.0], [1.0]], ["F1", "F3"], ["F2"])
    >>> c.redundant.tolist(), c.observable.tolist(), c.dof
    ([True, True], [True], 1)
    """
    A_y = np.asarray(A_y, dtype=float)
    if A_y.ndim != 2:
        raise ReconciliationError(f"A_y must be 2-D; got shape {A_y.shape}")
    m, n = A_y.shape
    A_z = np.zeros((m, 0)) if A_z is None else np.asarray(A_z, dtype=float)
    if A_z.ndim != 2 or A_z.shape[0] != m:
        raise ReconciliationError(f"A_z must be ({m}, nz); got shape {A_z.shape}")
    nz = A_z.shape[1]
    names = tuple(names) if names is not None else tuple(f"x[{j}]" for j in range(n))
    unknown_names = tuple(unknown_names) if unknown_names is not None else tuple(f"z[{k}]" for k in range(nz))
    rs = np.linalg.norm(np.hstack([A_y, A_z]), axis=1)
    rs = np.where(rs > 0, rs, 1.0)
    (_, P, _, obs), = _projection((A_z / rs[:, None])[None])
    B = P[0] @ (A_y / rs[:, None])
    cn = np.linalg.norm(B, axis=0)
    redundant = cn > NULL_TOL * max(cn.max(initial=0.0), 1e-300)
    if B.size:
        s = np.linalg.svd(B, compute_uv=False)
        dof = int(np.sum(s > 1e-10 * max(s[0], 1e-300)))
    else:
        dof = 0
    return Classification(redundant, obs[0].copy(), dof, names, unknown_names, P[0])

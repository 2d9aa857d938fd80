"""Rate expressions of the simulated plant, written independently of :mod:`kinetrace.kinetics`.

The simulator is the ground truth that the estimation code is tested against, so it
evaluates its rate laws here, in matrix form over all reactions of a unit at once:

    r_j = k_j(T) a_j(t) prod_i C_i^alpha_ij / (1 + sum_i K_ij C_i)^m_j

with the Arrhenius law in its reference-temperature form

    k_j(T) = k_ref,j exp[-(E_j/R) (1/T - 1/T_ref,j)]

A power law is the case K_ij = 0. ``a_j(t)`` is the catalyst activity for a catalysed
reaction and 1 otherwise. Negative concentrations (round-off of the integrator near
zero) are taken as zero.

References
----------
.. [1] Arrhenius, S. (1889). Uber die Reaktionsgeschwindigkeit bei der Inversion von
   Rohrzucker durch Sauren. Z. Phys. Chem. 4, 226-248.
.. [2] Hougen, O. A., Watson, K. M. (1947). Chemical Process Principles, Part III:
   Kinetics and Catalysis. Wiley (saturating, Langmuir-Hinshelwood form).
.. [3] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.
   Prentice Hall, ch. 3 and 10.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import KinetraceError

#: Molar gas constant [J/(mol K)] (CODATA 2018, exact in the 2019 SI).
GAS_CONSTANT = 8.314462618

_METHODS = {
    "power_law": "r = k prod C_i^a_i",
    "saturating": "r = k prod C_i^a_i / (1 + sum K_j C_j)^m",
}


def list_rate_laws() -> dict[str, str]:
    """Rate-law methods the simulator evaluates, name -> formula.

    >>> sorted(list_rate_laws())
    ['power_law', 'saturating']
    """
    return dict(_METHODS)


def arrhenius(k_ref, activation_energy, reference_temperature, temperature):
    """Rate constant at T by the reference-temperature form of the Arrhenius law.

    Parameters
    ----------
    k_ref : float or array_like
        Rate constant at the reference temperature. [(mol/m^3)^(1-n)/s]
    activation_energy : float or array_like
        Activation energy. [J/mol]
    reference_temperature : float or array_like
        Reference temperature. [K]
    temperature : float or array_like
        Temperature. [K]

    Returns
    -------
    float or ndarray
        k(T), same unit as ``k_ref``.

    References
    ----------
    .. [1] Arrhenius (1889), see the module references.

    >>> round(float(arrhenius(1.0, 58000.0, 343.15, 343.15)), 12)
    1.0
    >>> round(float(arrhenius(1.0, 58000.0, 343.15, 353.15)), 4)
    1.7783
    """
    t = np.asarray(temperature, dtype=float)
    return np.asarray(k_ref) * np.exp(-np.asarray(activation_energy) / GAS_CONSTANT
                                      * (1.0 / t - 1.0 / np.asarray(reference_temperature)))


@dataclass(frozen=True)
class Kinetics:
    """All rate laws of one unit as arrays, for fast evaluation inside the ODE right-hand side.

    Attributes
    ----------
    k_ref : ndarray (R,)
        Fresh-catalyst rate constants at T_ref. [(mol/m^3)^(1-n)/s]
    activation_energy : ndarray (R,)
        [J/mol]
    reference_temperature : ndarray (R,)
        [K]
    orders : ndarray (R, S)
        Reaction orders alpha_ij. [-]
    adsorption : ndarray (R, S)
        Saturation constants K_ij (zero for a power law). [m^3/mol]
    exponent : ndarray (R,)
        Denominator exponent m_j. [-]
    catalysed : ndarray (R,) of bool
        Whether the catalyst activity multiplies the rate.
    """

    k_ref: np.ndarray
    activation_energy: np.ndarray
    reference_temperature: np.ndarray
    orders: np.ndarray
    adsorption: np.ndarray
    exponent: np.ndarray
    catalysed: np.ndarray

    def rate_constants(self, temperature, activity=1.0) -> np.ndarray:
        """Effective rate constants k_j(T) a_j. [(mol/m^3)^(1-n)/s], shape (..., R)

        Parameters
        ----------
        temperature : float or array_like (...,)
            [K]
        activity : float or array_like (...,)
            Catalyst activity. [-]
        """
        t = np.asarray(temperature, dtype=float)[..., None]
        act = np.asarray(activity, dtype=float)[..., None]
        k = arrhenius(self.k_ref, self.activation_energy, self.reference_temperature, t)
        return k * np.where(self.catalysed, act, 1.0)

    def rates(self, conc, temperature, activity=1.0) -> np.ndarray:
        """Rates of all reactions. [mol/(m^3 s)], shape (..., R)

        Parameters
        ----------
        conc : array_like (..., S)
            Concentrations in the reactor. [mol/m^3]
        temperature : float or array_like (...,)
            [K]
        activity : float or array_like (...,)
            Catalyst activity. [-]

        >>> kin = Kinetics.build(["A", "B"], [("saturating", 1e-3, 0.0, 300.0, {"A": 1}, {"A": 1e-3}, 1.0)])
        >>> kin.rates([1000.0, 0.0], 300.0).round(6).tolist()
        [0.5]
        """
        c = np.maximum(np.asarray(conc, dtype=float), 0.0)
        num = np.prod(c[..., None, :] ** self.orders, axis=-1)
        den = (1.0 + c @ self.adsorption.T) ** self.exponent
        return self.rate_constants(temperature, activity) * num / den

    @classmethod
    def build(cls, species, laws, catalysed=None) -> "Kinetics":
        """Assemble from ``(method, k_ref, E, T_ref, orders, adsorption, exponent)`` tuples, one per reaction.

        Parameters
        ----------
        species : list of str
            Species order of the concentration vector.
        laws : list of tuple
            ``method`` (see :func:`list_rate_laws`), ``k_ref`` [SI], ``E`` [J/mol], ``T_ref`` [K],
            ``orders`` {species: order}, ``adsorption`` {species: K [m^3/mol]}, ``exponent`` [-].
        catalysed : list of bool, optional
            Per reaction; default all True.
        """
        species = list(species)
        nr, ns = len(laws), len(species)
        orders, ads = np.zeros((nr, ns)), np.zeros((nr, ns))
        k_ref, e_act, t_ref, expo = (np.zeros(nr) for _ in range(4))
        for j, (method, k, e, tr, ordr, adsorption, m) in enumerate(laws):
            if method not in _METHODS:
                raise KinetraceError(f"simulator rate law {method!r} is not available; allowed: "
                                     f"{', '.join(sorted(_METHODS))}")
            for name, table, target in (("orders", ordr, orders), ("adsorption", adsorption or {}, ads)):
                for s, v in table.items():
                    if s not in species:
                        raise KinetraceError(f"rate law {j}: {name} names species {s!r}, not in {species}")
                    target[j, species.index(s)] = float(v)
            if method == "power_law" and ads[j].any():
                raise KinetraceError(f"rate law {j}: a power law has no adsorption constants")
            k_ref[j], e_act[j], t_ref[j], expo[j] = k, e, tr, m
        cat = np.ones(nr, bool) if catalysed is None else np.asarray(catalysed, bool)
        return cls(k_ref, e_act, t_ref, orders, ads, expo, cat)

    @classmethod
    def from_unit_model(cls, model, catalysed) -> "Kinetics":
        """Kinetics of a configured unit (:class:`kinetrace.config.UnitModel`).

        Parameters
        ----------
        model : UnitModel
            The unit, in SI.
        catalysed : iterable of str
            Ids of the reactions that the catalyst activity multiplies.
        """
        catalysed = set(catalysed)
        laws, cat = [], []
        for rid in model.reaction_ids:
            if rid not in model.rate_laws:
                raise KinetraceError(f"unit {model.id}: reaction {rid!r} has no rate law; the simulator needs one")
            law = model.rate_laws[rid]
            p = law.params
            laws.append((law.method, law.k_ref, law.activation_energy, law.reference_temperature,
                         p.get("orders", {}), p.get("adsorption", {}), p.get("denominator_exponent", 1.0)))
            cat.append(rid in catalysed)
        return cls.build(model.species, laws, cat)

"""The flowsheet around a unit (``[units.flowsheet]``) reconciled in the daily check.

Every metered stream of the flowsheet (the reactor's own feed and outlet meters and the
``stream_flow`` / ``stream_conc`` tags of the other streams) is reconciled together by
:func:`kinetrace.reconcile.reconcile_network`; the global test and the Sidak-corrected
measurement test run over the whole network, so a separator's and a recycle's meters can
expose a biased reactor meter that the reactor's own balances cannot see.

Columns added to the unit's series (SI):

=================================  =========  ==========================================
column                             unit       meaning
=================================  =========  ==========================================
``flowsheet_flow:<stream>``        m^3/s      reconciled flow of each stream
``flowsheet_conc:<stream>:<sp>``   mol/m^3    reconciled concentration
``flowsheet_extent:<reaction>``    mol/s      extent rate at the reactor node
``flowsheet_global_test``          -          minimised objective (chi-square statistic)
``flowsheet_global_test_dof``      -          its degrees of freedom
``flowsheet_global_test_alarm``    -          1 where it exceeds its 95 % point
``flowsheet_suspect:<tag>``        -          1 where the measurement test flags the tag
=================================  =========  ==========================================
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..config import ROLE_KIND, UnitModel, tag_sigma
from ..config.model import flowsheet_network
from ..reconcile import global_test, measurement_test, reconcile_network

#: Level of significance of the flowsheet's tests. [-]
ALPHA = 0.05


def _meters(model: UnitModel, net):
    """(packed column, tag or None, known value) of every metered or known flowsheet variable."""
    tags = {t.tag: t for t in model.tags}
    out = []
    for j, st in enumerate(model.flowsheet.streams):
        if st.flow_tag is not None:
            out.append((net.flow_col(j), tags[st.flow_tag], None))
        for i, sp in enumerate(model.species):
            if sp in st.conc_tags:
                out.append((net.conc_col(j, i), tags[st.conc_tags[sp]], None))
            elif sp in st.known:
                out.append((net.conc_col(j, i), None, float(st.known[sp])))
    return out


def flowsheet_columns(values: pd.DataFrame, valid: pd.DataFrame, model: UnitModel) -> pd.DataFrame:
    """Reconcile the unit's flowsheet on the time grid; empty (no columns) without one.

    Parameters
    ----------
    values : DataFrame
        Per-tag readings on the grid, SI (as ingest returns them). [SI per tag]
    valid : DataFrame of bool
        False where a reading must not be used (it is then unmeasured at that step).
    model : UnitModel

    Returns
    -------
    DataFrame
        The columns of the module docstring, on ``values.index``.

    References
    ----------
    .. [1] Crowe, C. M. (1986). Reconciliation of process flow rates by matrix projection.
       Part II: the nonlinear case. AIChE J. 32(4), 616-623.
    .. [2] Mah, R. S. H., Tamhane, A. C. (1982). Detection of gross errors in process data.
       AIChE J. 28(5), 828-830.
    """
    out = pd.DataFrame(index=values.index)
    if model.flowsheet is None:
        return out
    net, _ = flowsheet_network(model.flowsheet, model.species, model.nu, model.reaction_ids)
    T = len(values)
    y = np.full((T, len(net.names)), np.nan)
    sigma = np.zeros((T, len(net.names)))
    suspects = []
    for col, tag, known in _meters(model, net):
        if tag is None:
            y[:, col] = known
            continue
        v = values[tag.tag].to_numpy(dtype=float) if tag.tag in values else np.full(T, np.nan)
        ok = valid[tag.tag].to_numpy(dtype=bool) if tag.tag in valid else np.isfinite(v)
        rel, absolute = tag_sigma(tag, ROLE_KIND[tag.role])
        y[:, col] = np.where(ok, v, np.nan)
        # a relative sigma of a reading near zero is floored at 1 % of the tag's typical reading
        # (a zero reading must not become "known exactly")
        typical = np.nanmedian(np.abs(v)) if np.isfinite(v).any() else 0.0
        sigma[:, col] = np.nan_to_num(rel * np.maximum(np.abs(v), 0.01 * typical) + absolute, nan=0.0)
        suspects.append((col, tag.tag))
    res = reconcile_network(net, y, sigma)
    for j, (s, _, _) in enumerate(net.streams):
        out[f"flowsheet_flow:{s}"] = res.x[:, net.flow_col(j)]
        for i, sp in enumerate(model.species):
            out[f"flowsheet_conc:{s}:{sp}"] = res.x[:, net.conc_col(j, i)]
    for q, rid in enumerate(model.reaction_ids):
        out[f"flowsheet_extent:{rid}"] = res.z[:, q]
    g = global_test(res, ALPHA)
    out["flowsheet_global_test"] = res.objective
    out["flowsheet_global_test_dof"] = res.dof.astype(float)
    out["flowsheet_global_test_alarm"] = g.reject.astype(float)
    flagged = measurement_test(res, ALPHA).flagged
    for col, name in suspects:
        out[f"flowsheet_suspect:{name}"] = flagged[:, col].astype(float)
    return out

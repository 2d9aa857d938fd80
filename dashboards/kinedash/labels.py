"""Readable names on the balances and data-quality pages: screening rules, measured quantities
(the pipeline's role columns, ``feed_conc:MA``) and historian tags (from the plant configuration:
the tag's description and what it measures). Any tag style is accepted; a tag the configuration
does not know keeps its own name.
"""

from __future__ import annotations

from pathlib import Path

#: Data-quality measure -> column header. [-]
RULES = {
    "rows_read": "read",
    "good": "good",
    "bad_quality_code": "quality not good",
    "bad_value": "not a number",
    "bad_timestamp": "bad time stamp",
    "out_of_range": "out of range",
    "frozen": "frozen",
    "spike": "spike",
    "duplicate": "repeated",
    "conflicting_duplicate": "two values",
    "out_of_order": "out of order",
    "outside_window": "outside window",
    "ambiguous_time": "ambiguous time",
    "nonexistent_time": "nonexistent time",
    "intervals": "intervals",
    "valid_intervals": "with a value",
    "missing_intervals": "without a value",
    "carried_intervals": "carried forward",
    "flagged_intervals": "flagged only",
}
#: What each header means, for the tables' help text.
RULE_HELP = {
    "bad_quality_code": "the historian's quality flag was not good",
    "bad_value": "the value was not a number",
    "out_of_range": "outside the tag's configured valid range",
    "frozen": "flat-lined for longer than allowed",
    "spike": "changed faster than the tag's largest credible rate",
    "duplicate": "the same reading twice",
    "conflicting_duplicate": "two different values at one time",
    "ambiguous_time": "local time repeated at a clock change",
    "nonexistent_time": "local time skipped at a clock change",
    "missing_intervals": "grid intervals without any usable value",
    "carried_intervals": "grid intervals filled from an earlier sample",
    "flagged_intervals": "grid intervals whose only values were flagged",
}

#: Measured quantity (role) -> words.
ROLES = {"feed_flow": "feed flow", "outlet_flow": "outlet flow", "temperature": "temperature", "level": "level",
         "volume": "volume", "feed_conc": "feed concentration", "outlet_conc": "outlet concentration",
         "pressure": "pressure"}


def rule_label(measure: str) -> str:
    """Column header of a data-quality measure (unknown ones: underscores as spaces).

    >>> rule_label("bad_quality_code"), rule_label("some_new_rule")
    ('quality not good', 'some new rule')
    """
    return RULES.get(str(measure), str(measure).replace("_", " "))


def quantity_label(column: str) -> str:
    """Words for a role column of the reconciliation (``feed_conc:MA`` -> feed concentration of MA).

    >>> quantity_label("feed_conc:MA"), quantity_label("outlet_flow"), quantity_label("volume")
    ('feed concentration of MA', 'outlet flow', 'volume')
    """
    role, _, species = str(column).partition(":")
    words = ROLES.get(role, role.replace("_", " "))
    return f"{words} of {species}" if species else words


def balance_label(name: str) -> str:
    """Words for a balance (``closure:<species>`` or ``closure:volume``).

    >>> balance_label("MA"), balance_label("volume"), balance_label("total_mass")
    ('MA balance', 'volume balance', 'total mass balance')
    """
    return f"{str(name).replace('_', ' ')} balance"


def tag_info(config: Path, unit: str) -> dict[str, dict]:
    """Per configured tag of ``unit``: ``role`` (role column, e.g. ``outlet_conc:MA``) and ``label``
    (``"R210-FT-101, feed flow (combined feed, Coriolis meter ...)"``). Empty when the
    configuration cannot be read or has no such unit."""
    from kinetrace.config import load_config
    from kinetrace.errors import KinetraceError

    try:
        cfg = load_config(config)
    except (KinetraceError, OSError):
        return {}
    u = next((x for x in cfg.units if x.id == unit), None)
    if u is None:
        return {}
    out = {}
    for t in u.tags:
        role = t.role if t.species is None else f"{t.role}:{t.species}"
        what = quantity_label(role)
        out[t.tag] = {"role": role, "label": f"{t.tag}, {what}" + (f" ({t.description})" if t.description else "")}
    return out

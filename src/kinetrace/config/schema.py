"""The plant configuration: what a kinetrace TOML file may say, validated by pydantic.

Quantities are written as strings of a number and a unit (``"14 m3"``,
``"62 kJ/mol"``, ``"80 degC"``) and stored in SI. Tags keep their engineering
unit (conversion happens at ingest). Cross-checks that span several sections
(species named in equations, tags, targets) live in :mod:`kinetrace.config.load`,
which reports every problem of a file together with its key path.
"""

from __future__ import annotations

from datetime import datetime
from typing import Annotated, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, field_validator

from ..units import parse_quantity


def _q(kind: str):
    return BeforeValidator(lambda v: parse_quantity(v, kind))


Volume = Annotated[float, _q("volume")]
Temperature = Annotated[float, _q("temperature")]
MolarEnergy = Annotated[float, _q("molar_energy")]
MolarMass = Annotated[float, _q("molar_mass")]
Concentration = Annotated[float, _q("concentration")]
InverseConcentration = Annotated[float, _q("inverse_concentration")]
VolumetricFlow = Annotated[float, _q("volumetric_flow")]


def _duration(low: float, high: float, allowed: str, *, low_open: bool = False):
    """A time span in SI, refused (with the value as written and the range) outside ``[low, high]``. [s]"""
    def check(v):
        x = parse_quantity(v, "time")
        if not ((low < x if low_open else low <= x) and x <= high):   # NaN fails both
            raise ValueError(f"duration {v!r} is outside the allowed range {allowed}")
        return x
    return BeforeValidator(check)


_DAY = 86400.0
#: A positive time span up to a year (hold limits, flat-line limits, ages of lab values). [s]
Duration = Annotated[float, _duration(0.0, 365 * _DAY, "more than 0 s, at most 365 d", low_open=True)]
#: A transport delay: zero or more, up to a day. [s]
DeadTime = Annotated[float, _duration(0.0, _DAY, "0 s to 1 d")]
#: The analysis grid step: 1 s to 1 d (finer steps cost memory without adding information at the
#: historian's resolution; coarser ones hide the dynamics of a CSTR). [s]
GridStep = Annotated[float, _duration(1.0, _DAY, "1 s to 1 d")]
Density = Annotated[float, _q("density")]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class Site(_Strict):
    """The plant site."""

    name: str
    timezone: str = "UTC"
    production_unit: str = "t/d"     # production and target at the operator edges (a mass per time)


class ColumnNames(_Strict):
    """Column names of a long historian table or CSV export."""

    timestamp: str = "timestamp"
    tag: str = "tag"
    value: str = "value"
    quality: str | None = "quality"


class Source(_Strict):
    """Where the historian readings come from.

    ``kind = "csv"`` reads ``path`` (a file or a folder of files);
    ``kind = "sqlite"`` reads the SQLite file at ``path``;
    ``kind = "sql"`` reads a SQLAlchemy URL taken from the environment variable
    named by ``url_env`` (never the URL itself in the file: it may hold a password).
    Relative paths are relative to the config file.
    """

    kind: Literal["csv", "sqlite", "sql"]
    path: str | None = None
    url_env: str | None = None
    table: str = "readings"
    layout: Literal["auto", "long", "wide"] = "auto"
    columns: ColumnNames = ColumnNames()
    good_quality: list[str] = Field(default_factory=lambda: ["good"])
    timezone: str | None = None
    # --- ingest options (see kinetrace.ingest; all optional) ---
    delimiter: str = Field(",", min_length=1, max_length=1)   # CSV field separator, e.g. ";"
    decimal: Literal[".", ","] = "."                           # CSV decimal mark
    skip_rows: int = Field(0, ge=0)          # CSV lines before the header line (export banners)
    description_rows: int = Field(0, ge=0)   # CSV lines after the header to skip (tag descriptions)
    units_row: bool = False                  # CSV line after the header (and description rows) gives units
    file_pattern: str = "*.csv*"             # files read when path is a folder (sorted by name)
    query: str | None = None                 # SQL text with bound :since, :until (replaces table)
    time_column: Literal["text", "native"] = "text"  # SQL timestamp column: ISO text or a timestamp type
    chunk_rows: int = Field(200_000, ge=1000)        # rows per streamed chunk
    dst_ambiguous: Literal["infer", "daylight", "standard", "flag"] = "infer"  # repeated local hour
    dst_missing: Literal["flag", "shift"] = "flag"   # local times in the skipped hour
    time_format: str | None = None            # strftime pattern, or "unix_s" / "unix_ms" / "spreadsheet_days"
    quality_match: Literal["exact", "folded"] = "exact"   # "folded": codes compared trimmed and case-folded
    max_line_bytes: int = Field(4 << 20, ge=1024)          # a longer CSV line is a counted bad row [bytes]
    max_decompressed_bytes: int = Field(64 << 30, ge=1 << 20)   # most bytes one gzip file may expand to
    frozen_after: Duration | None = 14400.0   # default flat-line limit of continuous/analyzer tags [s]
    max_gap: Duration | None = None           # default hold limit of continuous tags [s] (None: 3 grid steps)


    @field_validator("time_format")
    @classmethod
    def _time_format(cls, v):
        from ..ingest.timeformats import check_time_format

        return check_time_format(v)


class Store(_Strict):
    """Where results are written: a SQLAlchemy URL, or the env variable holding it."""

    url: str | None = None
    url_env: str | None = None

    @field_validator("url")
    @classmethod
    def _no_password_in_file(cls, v):
        """A config file is read, copied and versioned by many people: a password stays out of it."""
        from ..redact import redact_url, url_password

        if v is not None and url_password(v):
            raise ValueError(
                f"holds a password ({redact_url(v)}); a configuration file must not: remove store.url and put "
                f"the URL in the environment instead, e.g. export KINETRACE_STORE_URL='{redact_url(v)}' with the "
                "real password in place of ***, or name your own variable with store.url_env")
        return v


class Fleet(_Strict):
    """Where a backfill runs (``kinetrace backfill``): an existing Dask scheduler, or none (local)."""

    scheduler: str | None = None
    scheduler_env: str | None = None


class Analysis(_Strict):
    """Settings of the daily check."""

    grid: GridStep = 3600.0
    output_dir: str = "out"


class Species(_Strict):
    """A chemical species of a unit. ``molar_mass`` defaults to the one of ``formula``."""

    name: str = Field(pattern=r"^[A-Za-z_][A-Za-z0-9_\-]*$")
    formula: str | None = None
    molar_mass: MolarMass | None = None
    description: str = ""


class RateLaw(_Strict):
    """Rate law of one reaction, in the reference-temperature form of Arrhenius.

    ``k_ref`` is written with its unit (``"2.1e-3 1/s"``, ``"0.9 L/(mol min)"``); its
    dimension is checked against the overall order once the orders are known.
    """

    method: Literal["power_law", "saturating", "reversible"]
    k_ref: str
    activation_energy: MolarEnergy
    reference_temperature: Temperature
    orders: dict[str, float]
    adsorption: dict[str, InverseConcentration] = Field(default_factory=dict)
    denominator_exponent: float = 1.0
    reverse_orders: dict[str, float] = Field(default_factory=dict)
    equilibrium_constant: float | None = None
    reaction_enthalpy: MolarEnergy | None = None
    # self-calibration: the values above are starting points; these say what is held, fitted, trusted
    hold: list[str] = Field(default_factory=list)          # k_ref, activation_energy, K_<species>, order_<species>
    fit_orders: list[str] = Field(default_factory=list)    # species whose order is estimated
    uncertainty: dict[str, str] = Field(default_factory=dict)  # standard uncertainty of the configured values
    prior: bool = False                                    # configured values and uncertainties as priors


class ReactionSpec(_Strict):
    """A reaction written as an equation, with its rate law (optional for side reactions)."""

    id: str
    equation: str
    rate_law: RateLaw | None = None


Role = Literal["feed_flow", "outlet_flow", "feed_conc", "outlet_conc", "temperature", "level", "volume",
               "stream_flow", "stream_conc"]   # stream_*: meters of other flowsheet streams
Sampling = Literal["continuous", "analyzer", "lab"]

#: Physical kind of the SI value each tag role carries.
ROLE_KIND: dict[str, str] = {
    "feed_flow": "volumetric_flow",
    "outlet_flow": "volumetric_flow",
    "feed_conc": "concentration",
    "outlet_conc": "concentration",
    "temperature": "temperature",
    "level": "level",
    "volume": "volume",          # a volume transmitter (any volume unit: m3, L, gal, bbl, ...)
    "stream_flow": "volumetric_flow",
    "stream_conc": "concentration",
}


class Tag(_Strict):
    """One historian tag and what it measures.

    ``sigma`` is the standard measurement uncertainty: ``"1.5 %"`` of reading,
    or absolute in any unit of the tag's kind (``"0.03 mol/L"``).
    ``valid_range`` is the physical range in the tag's own unit.
    ``max_age`` is how long an analyzer or lab value may be carried forward.
    ``result_delay`` (lab tags) is the time from sampling to the result being reported; the
    tag's time stamps are the sampling times.
    """

    tag: str
    role: Role
    unit: str
    species: str | None = None
    sigma: str | None = None
    sampling: Sampling = "continuous"
    max_age: Duration | None = None
    dead_time: DeadTime = 0.0
    result_delay: DeadTime = 0.0
    valid_range: tuple[float, float] | None = None
    description: str = ""
    # --- ingest options (see kinetrace.ingest; all optional) ---
    density: Density | None = None            # for a mass-flow or mass-fraction tag; else the unit's density
    max_rate: float | None = None             # spike limit: largest credible change, tag units per minute
    frozen_after: Duration | None = None      # flat-line limit, overrides source.frozen_after [s]
    max_gap: Duration | None = None           # hold limit of a continuous reading, overrides source.max_gap [s]
    good_quality: list[str] | None = None     # quality codes counted good for this tag (else source's)


class Correlation(_Strict):
    """Correlated measurement errors of tags (e.g. two flows from one transmitter, the
    concentrations of one analyzer): ``coefficient`` for two tags, or a full correlation
    ``matrix`` (symmetric, unit diagonal, positive definite) over two or more tags, in the
    order of ``tags``. Tags in no entry are uncorrelated.
    """

    tags: list[str] = Field(min_length=2)
    coefficient: float | None = None
    matrix: list[list[float]] | None = None


class FlowsheetNode(_Strict):
    """A node of the flowsheet around the reactor: ``reactor`` (the unit itself), ``mixer``,
    ``splitter`` or ``separator``."""

    id: str
    kind: Literal["reactor", "mixer", "splitter", "separator"]


class FlowsheetStream(_Strict):
    """A stream between two nodes (``source``/``target`` omitted at the plant boundary), with the
    tags that measure its flow and concentrations (``conc_tags``: species -> tag) and the
    concentrations known exactly (``known``, e.g. ``{ B = "0 mol/m3" }`` for a fresh feed
    without B). Everything else is unmeasured."""

    id: str
    source: str | None = None
    target: str | None = None
    flow_tag: str | None = None
    conc_tags: dict[str, str] = Field(default_factory=dict)
    known: dict[str, Concentration] = Field(default_factory=dict)


class Flowsheet(_Strict):
    """Nodes and streams around the reactor, reconciled together in the daily check."""

    nodes: list[FlowsheetNode]
    streams: list[FlowsheetStream]


class VolumeSpec(_Strict):
    """Liquid volume: fixed, from a level tag through a level -> volume table, or from a volume tag.

    The table's levels are in the level tag's unit: % of span, or a length unit (m, mm, ft).
    """

    fixed: Volume | None = None
    level_tag: str | None = None
    table: list[tuple[float, float]] | None = None  # (level in the level tag's unit, volume m3)
    volume_tag: str | None = None                    # a tag of role "volume" (any volume unit)


class Target(_Strict):
    """Production target: product species and rate (mass or molar rate, e.g. ``"2.4 t/d"``)."""

    species: str
    rate: str


class Limits(_Strict):
    """Safe operating limits of the unit (a what-if never suggests a value outside them)."""

    temperature: tuple[Temperature, Temperature]
    feed_flow: tuple[VolumetricFlow, VolumetricFlow]
    level: tuple[float, float] | None = None


class Plan(_Strict):
    """The operating plan the production gap is measured against (feed rate below plan, etc.)."""

    feed_flow: VolumetricFlow


class Activity(_Strict):
    """How the fresh-catalyst baseline is taken: a period of the history, or the rate law's k_ref."""

    fresh_period: tuple[datetime, datetime] | None = None
    catalyst_changes: list[datetime] = Field(default_factory=list)
    # reactions whose rate the catalyst activity multiplies (None: every reaction with a rate law)
    catalysed: list[str] | None = None
    # decay family of the joint rate-law and activity fit: "auto" (chosen by QAICc) or one law
    decay_law: Literal["auto", "linear", "exponential", "hyperbolic", "nth_order"] = "auto"


#: Kinds of configured plant event (``[[units.events]]``). Every kind stops a carried-forward lab
#: value or feed assay and restarts the steady windows; a catalyst change also restarts the catalyst
#: trend and the monitoring charts (:mod:`kinetrace.config.model`, ``UnitModel.events``).
EventKind = Literal["catalyst_change", "shutdown", "restart", "feed_change", "analyzer_service", "other"]
EVENT_KINDS = EventKind.__args__


class Event(_Strict):
    """A known event in a unit's operation, e.g. ``{kind = "shutdown", time = "2027-05-02T06:00:00Z"}``."""

    kind: EventKind
    time: datetime
    note: str = ""


class Unit(_Strict):
    """One reactor."""

    id: str
    description: str = ""
    volume: VolumeSpec
    species: list[Species]
    reactions: list[ReactionSpec]
    key_reactant: str
    feed: dict[str, Concentration] = Field(default_factory=dict)
    tags: list[Tag]
    correlations: list[Correlation] = Field(default_factory=list)
    flowsheet: Flowsheet | None = None
    target: Target
    limits: Limits
    activity: Activity = Activity()
    plan: Plan | None = None
    density: Density | None = None
    events: list[Event] = Field(default_factory=list)

    @field_validator("species")
    @classmethod
    def _unique_species(cls, v: list[Species]) -> list[Species]:
        names = [s.name for s in v]
        dup = sorted({n for n in names if names.count(n) > 1})
        if dup:
            raise ValueError(f"species declared twice: {', '.join(dup)}")
        return v


class PlantConfig(_Strict):
    """A whole kinetrace configuration file."""

    site: Site
    source: Source
    store: Store = Store()
    analysis: Analysis = Analysis()
    fleet: Fleet = Fleet()
    units: list[Unit] = Field(min_length=1)

"""kinetrace.ingest: historian readings (CSV exports, SQL historians) -> one canonical frame per unit.

Entry points
------------
``read_unit(cfg, unit, *, config_path, since=None, until=None, grid=None) -> UnitData``
    One unit's readings in ``[since, until)``, screened, in SI, on a regular UTC grid
    (see :class:`UnitData` for the schema: ``values``, ``valid``, ``quality``,
    ``roles``, ``volume``, ``flagged``, ``details``, ``notes``, ``source_report``).
``read_new(cfg, unit, *, config_path, watermark=None) -> Pull``
    Incremental pull of the complete intervals after a watermark, and the new watermark.
``quality_text(data) -> str``
    The per-tag quality summary as text (what ``kinetrace check`` prints).
``estimate_dead_time(cause, effect, max_lag) -> DeadTimeEstimate``
    Cross-correlation dead-time diagnostic.

Sources (``[source]``)
----------------------
``kind = "csv"``: ``path`` is a file (plain or gzip, detected from its first bytes) or
a folder read file by file in name order (``file_pattern``, default ``"*.csv*"``).
Layout ``"long"`` (time, tag, value[, quality] columns named by ``[source.columns]``)
or ``"wide"`` (time column + one column per tag; an empty cell is no reading);
``layout = "auto"`` decides from the header. ``delimiter`` (``","``; e.g. ``";"``) and
``decimal`` (``"."`` or ``","``). Header variations are declared: ``skip_rows``
(lines before the header), ``description_rows`` (lines after it), ``units_row``
(a line of units, checked against the tag units; a disagreement is an error).
Bounded: a line longer than ``max_line_bytes`` (default 4 MiB) is a counted bad line
(``long_lines``, also ``malformed_lines``), skipped in bounded pieces; a gzip file may
expand to at most ``max_decompressed_bytes`` (default 64 GiB); named pipes, devices
(``/dev/zero``) and sockets are refused by name, never opened (:mod:`.files`).

``kind = "sqlite"`` (``path``) or ``kind = "sql"`` (URL from the environment variable
named by ``url_env``, through SQLAlchemy 2; never logged): a long ``table`` with
``[source.columns]``, or ``query``, a SELECT whose only inputs are the bound
parameters ``:since`` and ``:until``. ``time_column = "text"`` (stamps as text, any
spelling) or ``"native"`` (a timestamp type; without a time zone it is wall time of
``source.timezone``, else UTC). Reads are streamed in ``chunk_rows`` rows; PostgreSQL
(psycopg 3) via ``COPY ... TO STDOUT``, SQLite by rowid ranges (or a streamed SELECT
for a view, a WITHOUT ROWID or virtual table, or a table with a column called ``rowid``);
a SQLite path may hold ``#``, ``?``, ``%`` or spaces (it is opened as a percent-encoded,
read-only URI, so no file is ever created). The window is pushed into the WHERE clause
widened by a day on each side (ISO texts compared by their date part, texts of another
shape always read), and applied exactly after parsing, so no reading of the window is
lost whatever the stamps' spelling; stamps of a non-ISO ``time_format`` are read whole.

Time stamps and daylight saving
-------------------------------
``source.time_format`` names the spelling (strftime pattern, ``"unix_s"``,
``"unix_ms"``, ``"spreadsheet_days"``); without it ISO 8601 in any common spelling and
day-first / month-first numeric dates (``/``, ``.``, ``-``; 24- or 12-hour clock) are
recognised, the source deciding the day/month order (see
:mod:`kinetrace.ingest.timeformats`). A stamp with ``Z`` or an offset is exact. Without
an offset it is local wall time of ``source.timezone`` (an IANA zone); without a zone
it is refused. The
repeated hour (``dst_ambiguous``): ``"infer"`` places readings by file order, tag by
tag (first pass daylight, from the first backward step on standard; a tag whose
readings never step back is refused as ``ambiguous_time``); ``"daylight"``,
``"standard"`` or ``"flag"`` otherwise. The skipped hour (``dst_missing``): ``"flag"``
refuses them (``nonexistent_time``); ``"shift"`` reads them with the offset before
the change. See :mod:`kinetrace.ingest.timestamps`.

Units
-----
Each tag's unit is converted once to SI through pint (``kinetrace.units``):
volumetric flows (m3/h, L/min, gpm, bbl/d, ...), mass flows (kg/h, lb/h, t/d) with
a ``density`` (tag or unit), molar concentrations (mol/L, kmol/m3, lbmol/ft3),
mass fractions (wt%, kg/kg) with the species' molar mass and a density, mass
concentrations (g/L) with the molar mass, temperatures (degC, degF, K), levels in
% (to a fraction) or in a length unit (m, mm, ft: to metres; the volume table's levels
are in the level tag's unit), volumes of a volume transmitter (role ``"volume"``,
``[units.volume] volume_tag``; m3, L, gal, bbl, ...). A species needs a formula or a
molar mass only where a conversion uses it (the product; a mass-based concentration tag). An unknown or wrong-dimension unit is a ConfigError naming the tag,
the kind expected in words ("a volume per time") and the nearest valid spelling
(``M3/H`` -> ``m3/h``, ``USGPM`` -> ``gpm``; :mod:`kinetrace.unit_words`). A needed tag
without readings is named with the three nearest tag names the source holds (difflib),
and a one-field header holding ``;`` gets the ``source.delimiter`` hint.

Screening, per tag (first rule that applies decides the reading's fate)
-----------------------------------------------------------------------
time unreadable / ambiguous / non-existent; quality code not in ``good_quality``
(source, or the tag's own list; compared exactly, or trimmed and case-folded with
``source.quality_match = "folded"``; under exact matching, codes that differ from a good
one only by case or spaces are named once in a note); value empty or not a number; duplicate time
(same value: ``duplicate``; different: ``conflicting_duplicate``); outside
``valid_range``; ``spike`` (a one-reading excursion faster than ``max_rate`` [tag
unit/min]); ``frozen`` (identical values for ``frozen_after``, default 4 h from
``source.frozen_after``, continuous and analyzer tags). Fates add up to
``rows_read`` in ``quality``; ``flagged`` lists every refused reading.

Alignment
---------
Continuous tags: time-weighted mean of the held signal (each reading holds until
the next, at most ``max_gap``; default five sampling intervals, at least one grid
step, at most 6 h); an interval less than half covered is missing. Analyzer and
lab tags: mean of the readings in the interval, else the last reading if it is
at most ``max_age`` old at the interval's end, else missing. ``dead_time`` moves a
tag's readings back by that time first. ``valid`` is False where the value is
missing or the interval holds a refused reading of that tag.
"""

from .align import grid_edges, sample_mean_carry, time_weighted_mean
from .conversion import TagScale, tag_scale, unit_scales
from .deadtime import DeadTimeEstimate, estimate_dead_time
from .fates import FATE_NAMES, fate_names
from .incremental import Pull, read_new
from .reader import read_unit
from .screening import screen
from .summary import quality_text
from .timestamps import parse_timestamps
from .unitdata import UnitData, check_unit_data

__all__ = ["read_unit", "read_new", "quality_text", "Pull", "estimate_dead_time", "DeadTimeEstimate", "UnitData",
           "check_unit_data", "TagScale", "tag_scale", "unit_scales", "fate_names", "FATE_NAMES", "grid_edges",
           "time_weighted_mean", "sample_mean_carry", "screen", "parse_timestamps"]

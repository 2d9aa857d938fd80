"""Read a configuration file as TOML, with one clear problem for each way a file can be unreadable.

TOML files are UTF-8 text with LF or CRLF line ends (TOML 1.0.0, "Spec"). A file that is not text
(NUL bytes), is saved in another encoding (UTF-16, Latin-1), is nested deeper than the parser can
follow, or is not valid TOML is refused with where it went wrong; bare-CR line ends (old
spreadsheet and editor exports) are read as line ends, as Python's text mode reads them.

References
----------
.. [1] TOML v1.0.0 (2021). Tom's Obvious, Minimal Language. https://toml.io/en/v1.0.0
"""

from __future__ import annotations

import codecs
import tomllib
from pathlib import Path

from ..errors import ConfigError, Problem

#: Deepest nesting of arrays and inline tables accepted (a plant configuration needs about 5). [-]
MAX_NESTING = 100


def _nesting(text: str) -> int:
    """Deepest bracket nesting outside strings and comments (an upper bound of the TOML nesting)."""
    depth = deepest = 0
    quote = None
    comment = False
    for ch in text:
        if comment:
            comment = ch != "\n"
        elif quote:
            if ch == quote or ch == "\n":
                quote = None
        elif ch in "\"'":
            quote = ch
        elif ch == "#":
            comment = True
        elif ch in "[{":
            depth += 1
            deepest = max(deepest, depth)
        elif ch in "]}":
            depth = max(depth - 1, 0)
    return deepest


def read_toml(path: str | Path) -> dict:
    """The parsed content of a TOML configuration file.

    Parameters
    ----------
    path : str or Path
        The file.

    Returns
    -------
    dict

    Raises
    ------
    ConfigError
        Naming the file and what is wrong: not found, not a file, not readable, NUL bytes,
        not UTF-8 (UTF-16 recognised by its byte-order mark), nested too deeply, TOML syntax
        (with line and column).
    """
    path = Path(path)

    def refuse(where: str, message: str) -> ConfigError:
        return ConfigError(str(path), [Problem(where, message)])

    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise refuse("(file)", "file not found") from None
    except IsADirectoryError:
        raise refuse("(file)", "is a folder, not a file; give the configuration TOML file") from None
    except OSError as exc:
        raise refuse("(file)", f"cannot be read: {exc.strerror or exc}") from None
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        raise refuse("(file)", "is saved as UTF-16 text; TOML files are UTF-8: save it again as UTF-8")
    if b"\0" in data:
        line = data[:data.index(b"\0")].count(b"\n") + 1
        raise refuse(f"line {line}", "holds NUL bytes: this is not a text file (a TOML file is UTF-8 text)")
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise refuse(f"line {line}", f"byte 0x{data[exc.start]:02x} is not UTF-8 text; TOML files are UTF-8: "
                                     "save it again as UTF-8") from None
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    if _nesting(text) > MAX_NESTING:
        raise refuse("(TOML syntax)", f"arrays or inline tables nested deeper than {MAX_NESTING} levels; "
                                      "a plant configuration needs a handful")
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise refuse("(TOML syntax)", str(exc)) from None
    except RecursionError:
        raise refuse("(TOML syntax)", "nested too deeply to be read") from None

"""Reading TOML input files: typed access to tables that collects every problem.

Model and case readers use :class:`TableReader` so that a file with several
mistakes is reported in one go, each mistake naming the file, table and key,
and an unknown key suggests the closest valid one.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from pathlib import Path

from ..errors import InputError
from ..units import Where, format_like, parse

__all__ = ["load_toml", "toml_error", "Problems", "ProblemList", "TableReader", "closest"]


def closest(name: str, known) -> str:
    """The did-you-mean hint for a misspelt ``name``: ``"; did you mean 'X'?"`` with
    the closest of the ``known`` names (:func:`difflib.get_close_matches`, its
    default cutoff 0.6), or ``""`` when none is close."""
    hint = difflib.get_close_matches(name, list(known), n=1)
    return f"; did you mean {hint[0]!r}?" if hint else ""


def load_toml(path: str | Path) -> tuple[dict, str]:
    """Read a TOML file; return its data and its text.  Errors name the file."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError("file not found", file=str(path)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the file ({exc})", file=str(path)) from None
    try:
        return tomllib.loads(text), text
    except tomllib.TOMLDecodeError as exc:
        raise toml_error(text, exc, str(path)) from None


_DUPLICATE = ("Cannot overwrite a value", "Cannot declare", "Duplicate inline table key",
              "Cannot mutate immutable namespace")
_AT_LINE = re.compile(r"\(at line (\d+), column \d+\)")
_HEADER = re.compile(r"^\s*\[\[?\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")
_KEY = re.compile(r"^\s*((?:[A-Za-z0-9_-]+|\"[^\"]*\"|'[^']*')"
                  r"(?:\s*\.\s*(?:[A-Za-z0-9_-]+|\"[^\"]*\"|'[^']*'))*)\s*=")


def _unquote(dotted: str) -> str:
    """A TOML key as written (``a."b c"``) in plain dotted form (``a.b c``)."""
    parts = re.findall(r'"([^"]*)"|\'([^\']*)\'|([A-Za-z0-9_-]+)', dotted)
    return ".".join(next(p for p in part if p) if any(part) else "" for part in parts)


def _first_duplicate(lines: list[str]) -> tuple[int, int] | None:
    """``(first, last)`` line numbers (from 1) of the statement that repeats a key or a
    table: the shortest head of the file that fails with a repetition ends with it,
    and the longest head before it that reads cleanly ends just above it."""
    ok = 0
    for n in range(1, len(lines) + 1):
        try:
            tomllib.loads("\n".join(lines[:n]))
            ok = n
        except tomllib.TOMLDecodeError as exc:
            if str(exc).startswith(_DUPLICATE):
                first = ok + 1
                while first < n and (not lines[first - 1].strip()
                                     or lines[first - 1].lstrip().startswith("#")):
                    first += 1
                return first, n
    return None


def toml_error(text: str, exc: tomllib.TOMLDecodeError, file: str) -> InputError:
    """The :class:`InputError` of a file that is not valid TOML.

    The message shows the text of the line concerned; a key or table given
    twice is named, with the table it is in (``table`` and ``key`` of the
    error), since the TOML reader itself reports only a position.
    """
    lines = text.splitlines()
    reason = _AT_LINE.sub("", str(exc)).replace("(at end of document)", "").strip()
    span = _first_duplicate(lines) if str(exc).startswith(_DUPLICATE) else None
    if span is None:
        m = _AT_LINE.search(str(exc))
        n = int(m.group(1)) if m else None
        shown = (f" (line {n}: {lines[n - 1].strip()})" if n is not None and 0 < n <= len(lines)
                 and lines[n - 1].strip() else "")
        return InputError(f"not valid TOML: {reason}{shown}", file=file)
    first, last = span
    line = lines[first - 1].strip()
    where = f"line {first}" if first == last else f"lines {first}-{last}"
    table = None
    for above in reversed(lines[:first - 1]):
        h = _HEADER.match(above)
        if h:
            table = _unquote(h.group(1))
            break
    h = _HEADER.match(lines[first - 1])
    inline = re.match(r"Duplicate inline table key '(.*)'", reason)
    if h:
        name = _unquote(h.group(1))
        return InputError(f"the table [{name}] is given twice, or names a key that already "
                          f"holds a value ({where}: {line}); TOML allows each table and key "
                          f"once", file=file, table=name)
    k = _KEY.match(lines[first - 1])
    key = _unquote(k.group(1)) if k else None
    if inline:
        return InputError(f"the key {inline.group(1)!r} is given twice in one inline table "
                          f"({where}: {line})", file=file, table=table, key=key)
    return InputError(f"given twice in this table ({where}: {line}); TOML allows each key "
                      f"once per table", file=file, table=table, key=key)


class Problems:
    """Collects input problems and raises them together."""

    def __init__(self):
        self.items: list[InputError] = []

    def add(self, err: InputError) -> None:
        self.items.append(err)

    def __bool__(self) -> bool:
        return bool(self.items)

    def raise_if_any(self) -> None:
        if not self.items:
            return
        if len(self.items) == 1:
            raise self.items[0]
        raise ProblemList(self.items)


class ProblemList(InputError):
    """Several problems of one file, raised together.

    ``problems`` holds each :class:`~simulator.errors.InputError`; ``file``,
    ``table`` and ``key`` are those of the first.  The message names the file
    once and lists every problem with its own table and key.
    """

    def __init__(self, problems: list[InputError]):
        self.problems = list(problems)
        first = problems[0]
        text = f"{len(problems)} problems:\n" + "\n".join(f"  - {e}" for e in problems)
        super().__init__(text, file=first.file, table=first.table, key=first.key)

    def __str__(self) -> str:
        files = {p.file for p in self.problems}
        return f"{self.file}: {self.message}" if self.file and len(files) == 1 else self.message


_MISSING = object()


class TableReader:
    """Typed reads from one TOML table, recording problems instead of stopping.

    Every read returns a usable placeholder (``None``) when the value is bad, so
    reading continues and all problems of a file are found at once.
    """

    def __init__(self, data, where: Where, problems: Problems, atmosphere: float | None = None):
        if not isinstance(data, dict):
            problems.add(where.error(f"expected a table, got {type(data).__name__}"))
            data = {}
        self.data = data
        self.where = where
        self.problems = problems
        self.atmosphere = atmosphere
        self.seen: set[str] = set()

    def has(self, key: str) -> bool:
        self.seen.add(key)
        return key in self.data

    def raw(self, key: str, default=_MISSING):
        self.seen.add(key)
        if self.data.get(key) is not None:  # None (from Python callers) counts as absent
            return self.data[key]
        if default is _MISSING:
            self.problems.add(self.where.child(key).error("missing required key"))
            return None
        return default

    def quantity(self, key: str, dimension: str, default=_MISSING, *, positive: bool = False,
                 lo: float | None = None, hi: float | None = None, reason: str = ""):
        """Read a quantity with a unit and return it in SI units.

        Parameters
        ----------
        key
            The key in this table.
        dimension
            One of :data:`simulator.units.DIMENSIONS`.
        default
            Returned when the key is absent; without it the key is required.
        positive
            The value must be above zero.
        lo, hi
            Smallest and largest allowed values [SI unit of ``dimension``].
        reason
            Why the bounds are what they are, shown in the message (for
            example "the validity range of IAPWS-IF97").

        Returns
        -------
        float or None
            The SI value, ``default`` when absent, ``None`` when wrong (the
            problem is recorded).
        """
        value = self.raw(key, default)
        if value is None or value is default:
            return value
        w = self.where.child(key)
        try:
            si = parse(value, dimension, w, self.atmosphere)
        except InputError as exc:
            self.problems.add(exc)
            return None
        if positive and not si > 0.0:
            self.problems.add(w.error(f"must be positive, got {value!r}"))
            return None
        why = f" ({reason})" if reason else ""
        if lo is not None and si < lo:
            self.problems.add(w.error(f"{value!r} is below the allowed minimum "
                                      f"{format_like(lo, dimension, value)}{why}"))
            return None
        if hi is not None and si > hi:
            self.problems.add(w.error(f"{value!r} is above the allowed maximum "
                                      f"{format_like(hi, dimension, value)}{why}"))
            return None
        return si

    def number(self, key: str, default=_MISSING, *, lo: float | None = None,
               hi: float | None = None, lo_open: bool = False):
        value = self.raw(key, default)
        if value is None or value is default:
            return value
        w = self.where.child(key)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            if isinstance(value, str):
                try:
                    return self._check_range(parse(value, "fraction", w), w, lo, hi, lo_open)
                except InputError as exc:
                    self.problems.add(exc)
                    return None
            self.problems.add(w.error(f"expected a number, got {value!r}"))
            return None
        if not math.isfinite(value):
            self.problems.add(w.error(f"expected a finite number, got {value!r}"))
            return None
        return self._check_range(float(value), w, lo, hi, lo_open)

    def _check_range(self, x, w, lo, hi, lo_open):
        if lo is not None and (x < lo or (lo_open and x == lo)):
            self.problems.add(w.error(f"{x!r} is out of range (must be "
                                      f"{'>' if lo_open else '>='} {lo})"))
            return None
        if hi is not None and x > hi:
            hint = (f"; for {x:g} % write {x / 100:g} or '{x:g} %'"
                    if hi == 1.0 and 2.0 <= x <= 100.0 else "")
            self.problems.add(w.error(f"{x!r} is out of range (must be <= {hi}){hint}"))
            return None
        return x

    def string(self, key: str, default=_MISSING, choices=None):
        value = self.raw(key, default)
        if value is None or value is default:
            return value
        w = self.where.child(key)
        if not isinstance(value, str) or not value:
            self.problems.add(w.error(f"expected a name (text), got {value!r}"))
            return None
        if choices is not None and value not in choices:
            extra = closest(value, choices)
            self.problems.add(w.error(f"{value!r} is not one of {', '.join(map(repr, choices))}"
                                      f"{extra}"))
            return None
        return value

    def boolean(self, key: str, default=_MISSING):
        value = self.raw(key, default)
        if value is None or value is default:
            return value
        if not isinstance(value, bool):
            self.problems.add(self.where.child(key).error(f"expected true or false, got {value!r}"))
            return None
        return value

    def name_list(self, key: str, default=_MISSING, *, what: str = "item") -> list | None:
        """A list of names (text), each given once; one name alone is a list of one.

        A name given twice is reported with its positions (a list key such as
        ``[exhaust] nodes`` or ``[feedwater] train`` counts each entry, so a
        repeated one would count twice).  ``what`` says what one name is
        (``"exhaust node"``), for the messages.  Returns ``None`` when the value
        is wrong (the problem is recorded), ``default`` when absent.
        """
        value = self.raw(key, default)
        if value is None or value is default:
            return value
        w = self.where.child(key)
        if isinstance(value, str):
            value = [value]
        if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
            self.problems.add(w.error(f"expected a list of {what} names, got {value!r}"))
            return None
        for j, name in enumerate(value):
            if name in value[:j]:
                self.problems.add(w.error(
                    f"{name!r} is listed twice (positions {value.index(name) + 1} and {j + 1}): "
                    f"list each {what} once, as a repeated entry would count twice"))
                return None
        return list(value)

    def table_list(self, key: str) -> list:
        value = self.raw(key, [])
        if isinstance(value, dict):
            value = [value]
        if not isinstance(value, list):
            self.problems.add(self.where.child(key).error("expected a list of tables"))
            return []
        return value

    def sub(self, key: str, default=_MISSING) -> TableReader:
        value = self.raw(key, {} if default is _MISSING else default)
        if value is None and default is not _MISSING:
            value = {}
        if key not in self.data and default is _MISSING:
            self.problems.add(self.where.sub(key).error("missing required table"))
        return TableReader(value, self.where.sub(key), self.problems, self.atmosphere)

    def finish(self, also_valid=()) -> None:
        """Report keys nobody asked for, with the closest valid name."""
        known = self.seen | set(also_valid)
        valid = sorted(known)
        for key in self.data:
            if key not in known:
                extra = closest(key, valid) or (
                    f"; valid keys: {', '.join(valid)}" if valid else "")
                self.problems.add(self.where.child(key).error(f"unknown key{extra}"))


def csv_table(text: str, fname: str) -> tuple[int, list[str], list[tuple[int, list[str]]]]:
    """The header and rows of a CSV file's ``text``: ``(header line, column names,
    [(line, cells), ...])``; blank lines and lines starting with ``#`` are
    skipped.  A file without a header or without rows is refused, naming it."""
    import csv
    import io

    header, rows = None, []
    for lineno, row in enumerate(csv.reader(io.StringIO(text)), start=1):
        if not row or (len(row) == 1 and not row[0].strip()) or row[0].lstrip().startswith("#"):
            continue
        if header is None:
            header = (lineno, [c.strip() for c in row])
        else:
            rows.append((lineno, row))
    if header is None:
        raise InputError("the file has no header row", file=fname)
    if not rows:
        raise InputError("the file has a header but no rows", file=fname)
    return header[0], header[1], rows

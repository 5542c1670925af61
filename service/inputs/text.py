"""Delimited text tables: encoding, header block, dialect, numbers, bad cells.

The dialect (separator, decimal mark, thousands mark) is chosen by splitting a sample of
lines with the standard library's ``csv`` reader under each candidate and keeping the
one that reads every sample line as numbers; pandas' C parser then reads the whole body
with that dialect. Lines before the table are the header block: ``key: value``,
``key;value``, ``key=value`` lines are returned as metadata, and a sample rate found
there is returned as a number.
"""

from __future__ import annotations

import codecs
import csv
import io
import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from service.core.errors import InputError

from ._common import plural

__all__ = ["Table", "decode_text", "metadata_sample_rate", "read_table", "sniff_table"]

_SAMPLE_LINES = 200  # non-blank lines examined to find the table and its dialect

# Spellings of "no value" written by spreadsheets, C runtimes and analysers. pandas reads
# "inf"/"-inf"/"Infinity" itself; everything here becomes NaN.
_NA_MARKERS = (
    "",
    "nan",
    "-nan",
    "+nan",
    "nan(ind)",
    "-nan(ind)",
    "1.#qnan",
    "-1.#qnan",
    "1.#snan",
    "-1.#snan",
    "1.#ind",
    "-1.#ind",
    "1.#inf",
    "-1.#inf",
    "#n/a",
    "n/a",
    "na",
    "null",
    "none",
    "#num!",
    "#value!",
    "#div/0!",
    "#ref!",
    "#null!",
    "---",
    "--",
    "-",
)
_NA_SET = frozenset(_NA_MARKERS) | {"inf", "-inf", "+inf", "infinity", "-infinity", "+infinity"}
_NA_VALUES = sorted(
    {v for m in _NA_MARKERS for v in (m, m.upper(), m.capitalize(), m.title())} - {""}
)

# '#' opens a comment at the start of a line or after a blank, unless it is one of the
# markers above (#N/A, 1.#INF ...): a cell is never cut at its '#'.
_COMMENT = re.compile(
    r"(^|[ \t])#(?!N/A|NA\b|NUM!|VALUE!|DIV/0!|REF!|NULL!|INF|QNAN|SNAN|IND)[^\n]*",
    re.IGNORECASE | re.MULTILINE,
)

_SEPARATORS = ("\t", ";", ",", " ")
_SEP_NAMES = {"\t": "tab", ";": "semicolon", ",": "comma", " ": "spaces"}
_EXP = r"(?:[eE][+-]?\d+)?"
_NUMBER = {
    (".", None): re.compile(rf"[+-]?(?:\d+\.?\d*|\.\d+){_EXP}"),
    (",", None): re.compile(rf"[+-]?(?:\d+,?\d*|,\d+){_EXP}"),
    (".", ","): re.compile(rf"[+-]?(?:\d{{1,3}}(?:,\d{{3}})+|\d+)(?:\.\d*)?{_EXP}"),
    (",", "."): re.compile(rf"[+-]?(?:\d{{1,3}}(?:\.\d{{3}})+|\d+)(?:,\d*)?{_EXP}"),
}
# Preference when several dialects read the sample: plain decimal point, decimal comma,
# then thousands marks (only when a cell needs them, e.g. 1,234.5 or 1.234,5).
_MARKS = ((".", None), (",", None), (".", ","), (",", "."))

_KEY_VALUE = re.compile(r"^\s*([^:=;\t,]+?)\s*(?::|=|;|\t|,)\s*(.*?)\s*[;,\t]*\s*$")
_RATE_KEY = re.compile(
    r"^(?:sampl(?:e|ing)[ _-]?(?:rate|freq(?:uency)?)|samplerate|fs|f_s|sr|"
    r"rate|abtastrate|abtastfrequenz|fr[ée]quence d'[ée]chantillonnage)\b",
    re.IGNORECASE,
)
_STEP_KEY = re.compile(
    r"^(?:delta[ _-]?t|dt|sampl(?:e|ing)[ _-]?(?:interval|period)|time[ _-]?(?:step|increment)"
    r"|x[ _-]?increment|increment)\b",
    re.IGNORECASE,
)
_RATE_UNITS = {
    "hz": 1.0,
    "khz": 1e3,
    "mhz": 1e6,
    "s/s": 1.0,
    "ks/s": 1e3,
    "ms/s": 1e6,
    "sa/s": 1.0,
    "ksa/s": 1e3,
    "sps": 1.0,
    "ksps": 1e3,
    "samples/s": 1.0,
    "1/s": 1.0,
}
_STEP_UNITS = {"s": 1.0, "sec": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "μs": 1e-6, "ns": 1e-9}
_VALUE_UNIT = re.compile(r"^\s*([+-]?\d+(?:[.,]\d+)?(?:[eE][+-]?\d+)?)\s*([^\s\d].*)?$")


def decode_text(raw: bytes, field_name: str) -> tuple[str, str]:
    """Bytes to text: UTF-8 (BOM or not), UTF-16 with BOM, else Windows-1252.

    Returns the text and the encoding's name. Content that is not text (NUL bytes or
    control characters outside UTF-16) is an error saying so, before any parsing.
    """
    if raw.startswith(codecs.BOM_UTF8):
        return _decode(raw[3:], "utf-8", field_name), "UTF-8 with BOM"
    if raw.startswith((codecs.BOM_UTF32_LE, codecs.BOM_UTF32_BE)) and len(raw) % 4 == 0:
        return _decode(raw, "utf-32", field_name), "UTF-32 with BOM"
    if raw.startswith(codecs.BOM_UTF16_LE):
        return _decode(raw[2:], "utf-16-le", field_name), "UTF-16 LE with BOM"
    if raw.startswith(codecs.BOM_UTF16_BE):
        return _decode(raw[2:], "utf-16-be", field_name), "UTF-16 BE with BOM"
    head = raw[:8192]
    if b"\x00" in head:
        even = head[0::2].count(0)
        odd = head[1::2].count(0)
        half = len(head) // 2
        if odd > 0.4 * half and even == 0:
            return _decode(raw, "utf-16-le", field_name), "UTF-16 LE (no BOM)"
        if even > 0.4 * half and odd == 0:
            return _decode(raw, "utf-16-be", field_name), "UTF-16 BE (no BOM)"
        raise _binary(field_name, "it contains NUL bytes")
    try:
        text, name = raw.decode("utf-8"), "UTF-8"
    except UnicodeDecodeError:
        try:
            text, name = raw.decode("cp1252"), "Windows-1252"
        except UnicodeDecodeError:
            raise _binary(field_name, "it is neither UTF-8 nor Windows-1252 text") from None
    _check_controls(text, field_name)
    return text, name


def _decode(raw: bytes, encoding: str, field_name: str) -> str:
    try:
        text = raw.decode(encoding)
    except UnicodeDecodeError as exc:
        raise InputError(
            f"the file starts with a {encoding.upper()} byte-order mark but byte "
            f"{exc.start} does not decode as {encoding.upper()}",
            field=field_name,
            value=encoding,
            code="unreadable_encoding",
            remedy="Save the file again as UTF-8 (or UTF-16 with a byte-order mark)",
        ) from None
    _check_controls(text, field_name)
    return text


def _newlines(text: str) -> str:
    """CRLF and lone CR (old Mac exports) become LF."""
    if "\r" not in text:
        return text
    return text.replace("\r\n", "\n").replace("\r", "\n")


def _check_controls(text: str, field_name: str) -> None:
    head = text[:8192]
    controls = sum(1 for ch in head if ord(ch) < 32 and ch not in "\t\n\r\f\v")
    if controls > max(2, 0.01 * len(head)):
        raise _binary(
            field_name, f"{controls} of its first {len(head)} characters are control codes"
        )


def _binary(field_name: str, why: str) -> InputError:
    return InputError(
        f"the file is not text: {why}",
        field=field_name,
        code="binary_content",
        status=415,
        remedy=(
            "Upload the spectrum or record as text (CSV, TSV), or a time record as WAV or "
            ".npy; export from the analyser as text if this is its own binary format"
        ),
    )


@dataclass(frozen=True)
class Dialect:
    sep: str  # "\t", ";", "," or " " (runs of blanks)
    decimal: str
    thousands: str | None

    def split(self, line: str) -> list[str]:
        try:
            return self._split(line)
        except csv.Error:  # a stray quote or carriage return: not a clean data line
            return [line]

    def _split(self, line: str) -> list[str]:
        if self.sep == " ":
            cells = next(csv.reader([line.strip()], delimiter=" ", skipinitialspace=True))
            return [c.strip() for c in cells if c.strip() != ""] or [""]
        cells = next(csv.reader([line], delimiter=self.sep, skipinitialspace=True))
        return [c.strip() for c in cells] or [""]

    def is_number(self, cell: str) -> bool:
        return _NUMBER[(self.decimal, self.thousands)].fullmatch(cell) is not None

    def describe(self) -> str:
        mark = "comma" if self.decimal == "," else "point"
        text = f"{_SEP_NAMES[self.sep]}-separated, decimal {mark}"
        if self.thousands:
            text += f", thousands mark {self.thousands!r}"
        return text


@dataclass(eq=False)
class Table:
    """Numbers read from a text table.

    ``values`` has one row per data line (blank lines removed) and one column per field;
    a missing or non-numeric-marker cell is NaN, ``inf`` stays inf. ``lines`` gives the
    1-based line number of each row in the original text.
    """

    values: NDArray[np.float64]
    lines: NDArray[np.int64]
    names: tuple[str, ...]
    metadata: dict[str, str]
    dialect: Dialect
    encoding: str
    notes: list[str] = field(default_factory=list)

    @property
    def n_columns(self) -> int:
        return int(self.values.shape[1])

    def column_label(self, i: int) -> str:
        if self.names and self.names[i]:
            return f"{i} {self.names[i]!r}"
        return f"{i} (unnamed)"

    @property
    def sample_rate_hz(self) -> float | None:
        return metadata_sample_rate(self.metadata)


def _strip_comments(text: str) -> str:
    return _COMMENT.sub(r"\1", text) if "#" in text else text


def _is_data(cells: list[str], dialect: Dialect) -> bool:
    numeric = False
    for cell in cells:
        if dialect.is_number(cell):
            numeric = True
        elif cell.lower() not in _NA_SET:
            return False
    return numeric


def _find_table(
    sample: list[tuple[int, str]],
) -> tuple[Dialect, int, int] | None:
    """(dialect, index of the first data line in ``sample``, column count) or None.

    Each candidate dialect splits the sample with the ``csv`` module; the one under which
    most lines read as numbers with one column count wins (then more columns, then the
    order of ``_SEPARATORS`` and ``_MARKS``). Lines above the first such line are the
    header block.
    """
    results: list[tuple[int, int, int, int, int, int, Dialect]] = []
    preference = 0
    quoted = any('"' in line for _, line in sample)
    present = {sep for sep in _SEPARATORS if any(sep in line for _, line in sample)}
    for sep in _SEPARATORS:
        for decimal, thousands in _MARKS:
            preference += 1
            if sep not in present and (sep != " " or present):
                continue  # a separator that never occurs reads one column: try it once
            if sep in (decimal, thousands) and not (sep == "," and quoted):
                continue  # a comma separates and marks decimals only inside quotes
            dialect = Dialect(sep, decimal, thousands)
            counts = []
            for _, line in sample:
                cells = dialect.split(line)
                counts.append(len(cells) if _is_data(cells, dialect) else 0)
            data = [c for c in counts if c]
            if not data:
                continue
            # the most frequent column count; on a tie the one met first
            columns = max(set(data), key=lambda c: (data.count(c), -counts.index(c)))
            start = counts.index(columns)
            # most lines in the main column count, then most lines read as numbers at
            # all, then a column-name line above the data that fits the count
            header = start > 0 and _header_names(sample[start - 1][1], dialect, columns) is not None
            key = (data.count(columns), len(data), int(header), -start, columns, -preference)
            results.append((*key, dialect))
    if not results:
        return None
    # "1,5" on every line is a two-column CSV of integers before it is one column with
    # decimal commas, unless a column-name line says one column.
    comma_table = any(r[6].sep == "," and r[4] >= 2 and 2 * r[0] >= len(sample) for r in results)
    if comma_table:
        results = [r for r in results if not (r[4] == 1 and r[6].decimal == "," and not r[2])]
    best = max(results, key=lambda r: r[:6])
    return best[6], -best[3], best[4]


def _header_names(line: str, dialect: Dialect, columns: int) -> tuple[str, ...] | None:
    """Column names from the line above the data, or None when it is not a header."""
    candidates = [dialect.split(line)]
    if dialect.sep == " ":
        stripped = line.strip()
        candidates.append([c for c in re.split(r"\s{2,}|\t", stripped) if c])
        merged: list[str] = []
        for token in stripped.split():
            if merged and token[:1] in "([":
                merged[-1] += " " + token
            else:
                merged.append(token)
        candidates.append(merged)
    for cells in candidates:
        names = tuple(c.strip().strip("\"'").strip() for c in cells)
        if len(names) == columns and not any(dialect.is_number(n) for n in names if n):
            return names
    return None


def _parse_metadata(lines: list[str]) -> dict[str, str]:
    meta: dict[str, str] = {}
    for raw in lines:
        line = raw.strip().lstrip("#").strip().strip('"')
        if not line or set(line) <= set("-=*_[]") or re.fullmatch(r"\[[^\]]*\]", line):
            continue  # rules and section markers ("[Header]") carry no value
        match = _KEY_VALUE.match(line)
        if match and match.group(1).strip():
            key = match.group(1).strip().strip("\"'")
            value = re.sub(r"\s*[;\t]\s*", " ", match.group(2)).strip().strip("\"'")
        else:
            key, value = line, ""
        if key in meta and meta[key] != value:
            key = f"{key} ({sum(k.startswith(key) for k in meta) + 1})"
        meta[key] = value
    return meta


def _number(text: str) -> float | None:
    try:
        return float(text.replace(",", "."))
    except ValueError:
        return None


def metadata_sample_rate(metadata: dict[str, str]) -> float | None:
    """A sample rate (Hz) from header lines: ``Sample rate: 12.8 kHz``, ``dt = 1e-4 s`` ...

    The unit may follow the value or stand in the key (``Fs (kHz): 12.8``); without one
    Hz and seconds are assumed.
    """
    for key, value in metadata.items():
        bare = re.sub(r"\s*[(\[].*?[)\]]\s*", " ", key).strip()
        key_unit = re.search(r"[(\[]\s*([^)\]]+?)\s*[)\]]", key)
        match = _VALUE_UNIT.match(value)
        if match is None:
            continue
        number = _number(match.group(1))
        unit = (match.group(2) or (key_unit.group(1) if key_unit else "")).strip().lower()
        unit = unit.replace(" ", "")
        if number is None or number <= 0:
            continue
        if _RATE_KEY.match(bare):
            scale = _RATE_UNITS.get(unit, 1.0 if unit == "" else None)
            if scale is not None:
                return number * scale
        elif _STEP_KEY.match(bare):
            step = _STEP_UNITS.get(unit, 1.0 if unit == "" else None)
            if step is not None:
                return 1.0 / (number * step)
    return None


def _sample_lines(clean: str) -> list[tuple[int, str]]:
    """The first non-blank lines with their 1-based numbers."""
    sample: list[tuple[int, str]] = []
    pos, number = 0, 0
    while pos < len(clean) and len(sample) < _SAMPLE_LINES:
        end = clean.find("\n", pos)
        end = len(clean) if end < 0 else end
        number += 1
        line = clean[pos:end].strip()
        if line:
            sample.append((number, line))
        pos = end + 1
    return sample


def sniff_table(data: bytes) -> tuple[int, tuple[str, ...]] | None:
    """(column count, column names) of a text table from its first lines, or None.

    Reads at most the first 64 KiB; None when that is not text or holds no table.
    """
    head = data[:65536]
    if len(data) > len(head):
        if head.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
            head = head[: len(head) & ~1]
        else:
            head = head[: head.rfind(b"\n") + 1]
    try:
        text, _ = decode_text(head, "file")
    except InputError:
        return None
    sample = _sample_lines(_strip_comments(_newlines(text)))
    found = _find_table(sample)
    if found is None:
        return None
    dialect, start, columns = found
    names = _header_names(sample[start - 1][1], dialect, columns) if start else None
    return columns, names or ()


def read_table(
    data: bytes,
    *,
    max_lines: int,
    limit_text: str,
    what: str,
    field_name: str,
) -> Table:
    """Read a numeric table from text bytes (any fixed number of columns).

    Raises
    ------
    InputError
        Not text, no numeric table, ragged or non-numeric lines (naming the first one),
        too many lines.
    """
    text, encoding = decode_text(data, field_name)
    text = _newlines(text)
    n_raw = text.count("\n") + (0 if text.endswith("\n") or not text else 1)
    if n_raw > max_lines:
        raise InputError(
            f"the text has {n_raw} lines; the limit is {limit_text}",
            field=field_name,
            value=n_raw,
            limit=max_lines,
            code="above_limit",
            status=413,
        )
    # Line-preserving: comments become blank, so row i still maps to one line.
    clean = _strip_comments(text)
    sample = _sample_lines(clean)
    if not sample:
        raise InputError(
            f"no data lines: expected {what}, one line per value",
            field=field_name,
            code="no_numeric_rows",
            remedy="Upload a table of numbers, one line per value",
        )
    found = _find_table(sample)
    if found is None:
        first = sample[0]
        raise InputError(
            f"no table of numbers found: expected {what}; the first line is "
            f"{first[1][:80]!r} (line {first[0]})",
            field=field_name,
            code="no_numeric_rows",
            remedy=(
                "Upload a table with one line per value, columns separated by commas, "
                "semicolons, tabs or spaces"
            ),
        )
    dialect, start, columns = found
    start_line = sample[start][0]
    names: tuple[str, ...] = ()
    header_no = 0
    if start:
        maybe = _header_names(sample[start - 1][1], dialect, columns)
        if maybe is not None:
            names, header_no = maybe, sample[start - 1][0]
    raw_lines = text[: _offset(text, start_line)].split("\n")[: start_line - 1]
    metadata = _parse_metadata(
        [ln for i, ln in enumerate(raw_lines, 1) if ln.strip() and i != header_no]
    )
    body = clean[_offset(clean, start_line) :]
    try:
        values = _read_body(body, dialect, columns)
    except _RaggedError as exc:
        match = _FIELD_COUNT.search(str(exc))
        if match is None:
            raise InputError(str(exc).strip(), field=field_name, code="unreadable_table") from None
        raise count_error(
            start_line - 1 + int(match.group(2)),
            int(match.group(3)),
            columns,
            what,
            dialect,
            field_name,
        ) from None
    except _CellError:
        raise _first_bad_cell(body, start_line, dialect, columns, what, field_name) from None
    blank = np.all(np.isnan(values), axis=1)
    if np.any(blank):
        # An all-NaN row is a blank (or comment) line, or a line of NaN markers.
        body_lines = body.split("\n")
        rows = np.flatnonzero(blank)
        marked = np.array([bool(body_lines[i].strip()) for i in rows])
        blank[rows[marked]] = False
    keep = np.flatnonzero(~blank)
    values = values[keep]
    lines = keep.astype(np.int64) + start_line
    table = Table(values, lines, names, metadata, dialect, encoding)
    _check_short_rows(table, body, start_line, what, field_name)
    if values.shape[0] == 0:
        raise InputError(
            f"no data lines after line {start_line - 1}: expected {what}",
            field=field_name,
            code="no_numeric_rows",
        )
    if metadata:
        verb = "was" if len(metadata) == 1 else "were"
        table.notes.append(
            f"{plural(len(metadata), 'header line')} before the table {verb} read as metadata."
        )
    return table


def _offset(text: str, line: int) -> int:
    """Index where 1-based ``line`` starts."""
    pos = 0
    for _ in range(line - 1):
        pos = text.index("\n", pos) + 1
    return pos


def _read_options(dialect: Dialect, columns: int) -> dict[str, object]:
    return {
        "sep": r"\s+" if dialect.sep == " " else dialect.sep,
        "decimal": dialect.decimal,
        "thousands": dialect.thousands,
        "header": None,
        "names": list(range(columns)),
        "index_col": False,
        "engine": "c",
        "skipinitialspace": True,
        "skip_blank_lines": False,
        "na_values": _NA_VALUES,
        "keep_default_na": True,
        "quotechar": '"',
    }


def _read_body(body: str, dialect: Dialect, columns: int) -> NDArray[np.float64]:
    options = _read_options(dialect, columns)
    try:
        stream = io.BytesIO(body.encode("utf-8"))
        frame = pd.read_csv(stream, dtype=np.float64, encoding="utf-8", **options)
        return np.asarray(frame.to_numpy(dtype=np.float64))
    except pd.errors.ParserError as exc:
        raise _RaggedError(str(exc)) from None
    except ValueError:
        raise _CellError() from None


_FIELD_COUNT = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")


def _first_bad_cell(
    body: str, start_line: int, dialect: Dialect, columns: int, what: str, field_name: str
) -> InputError:
    """Word the first line pandas could not read (slow path, errors only)."""
    for offset, line in enumerate(body.split("\n")):
        if not line.strip():
            continue
        number = start_line + offset
        cells = dialect.split(line)
        if len(cells) != columns:
            return count_error(number, len(cells), columns, what, dialect, field_name)
        for column, cell in enumerate(cells, start=1):
            if not dialect.is_number(cell) and cell.lower() not in _NA_SET:
                return InputError(
                    f"line {number}, column {column}: {cell[:40]!r} is not a number",
                    field=field_name,
                    value=cell[:40],
                    code="not_a_number",
                    remedy=(
                        f"Correct or delete line {number}; the table is read as "
                        f"{dialect.describe()}"
                    ),
                )
    return InputError(
        f"cannot read the text as numbers ({what})", field=field_name, code="unreadable_table"
    )


class _RaggedError(Exception):
    pass


class _CellError(Exception):
    pass


def _check_short_rows(table: Table, body: str, start_line: int, what: str, field_name: str) -> None:
    """Rows with NaN: a missing field is a structural error; a marker is a bad value."""
    bad = np.flatnonzero(np.any(np.isnan(table.values), axis=1))
    if bad.size == 0:
        return
    body_lines = body.split("\n")
    columns = table.n_columns
    for row in bad:
        number = int(table.lines[row])
        cells = table.dialect.split(body_lines[number - start_line])
        if len(cells) != columns:
            raise count_error(number, len(cells), columns, what, table.dialect, field_name)


def count_error(
    number: int, count: int, columns: int, what: str, dialect: Dialect, field_name: str
) -> InputError:
    return InputError(
        f"line {number} has {plural(count, 'column')}; expected {columns} ({what}) "
        f"separated by {_SEP_NAMES[dialect.sep]}",
        field=field_name,
        value=count,
        limit=columns,
        code="ragged_line",
        remedy=f"Make every line of the table have {columns} columns",
    )

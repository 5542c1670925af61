"""Spectra from text: which column is which, their units, and linear or dB."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from service.core.errors import InputError
from service.core.spectrum import bad_negative_cells, detect_unit

from ._common import ALLOWANCE, DEFAULT_MAX_SPECTRUM_LINES, check_limit, plural, to_bytes
from .text import Table, read_table

__all__ = ["ParsedSpectrum", "parse_spectrum_text"]


@dataclass(frozen=True, eq=False)
class ParsedSpectrum:
    """A spectrum read from text.

    Attributes
    ----------
    freq_hz : ndarray
        Frequencies, Hz (converted from kHz or cpm when the header says so), strictly
        increasing, >= 0.
    amplitude : ndarray
        Values as written (linear amplitude or dB, see ``unit``); the magnitude
        ``hypot(real, imag)`` when the table gives real and imaginary parts.
    unit : str
        ``"linear"`` or ``"db"`` (the scale).
    unit_reason : str
        Why the scale was chosen, one sentence.
    n_lines : int
        Number of data lines kept.
    header : tuple of str
        Column names from the header line, empty when there is none.
    scale_source : str
        How the scale was decided: ``"request"`` (the ``unit`` argument), ``"header"``
        (a column name or header line names dB, or real/imaginary columns) or
        ``"values"`` (from the numbers alone).
    freq_unit : str
        The frequency unit the file used: ``"Hz"``, ``"kHz"``, ``"cpm"`` ...
    amplitude_unit : str or None
        The amplitude unit named in the header (``"g"``, ``"m/s²"``, ``"mm/s"``,
        ``"dB re 1 g"`` ...), None when the file does not say.
    frequency_column, amplitude_column : str
        Which columns were used, as ``"1 'Amplitude (g)'"`` (0-based index and name).
    metadata : dict
        ``key: value`` lines from the header block before the table.
    sample_rate_hz : float or None
        A sample rate found in the header block, Hz (for a request that has none).
    dropped : dict
        Rows left out, by reason: ``"non_finite"`` (NaN, inf, #N/A, empty cells ...),
        ``"negative"`` (negative values in a linear column).
    notes : tuple of str
        Sentences about how the file was read, each once.
    format_description : str
        Encoding and dialect, e.g. ``"UTF-16 LE with BOM, semicolon-separated, decimal
        comma"``.
    """

    freq_hz: NDArray[np.float64]
    amplitude: NDArray[np.float64]
    unit: str
    unit_reason: str
    n_lines: int
    header: tuple[str, ...] = ()
    scale_source: str = "values"
    freq_unit: str = "Hz"
    amplitude_unit: str | None = None
    frequency_column: str = "0"
    amplitude_column: str = "1"
    metadata: dict[str, str] = field(default_factory=dict)
    sample_rate_hz: float | None = None
    dropped: dict[str, int] = field(default_factory=dict)
    notes: tuple[str, ...] = ()
    format_description: str = ""

    @property
    def n_dropped(self) -> int:
        return sum(self.dropped.values())


_WHAT = "frequency and amplitude"
_DB = re.compile(r"(?<![a-z])db", re.IGNORECASE)
FREQ_NAME = re.compile(
    r"freq|frequenz|fr[ée]quence|frecuencia|hz\b|cpm\b|rpm\b|^f$|^f\s*[\s(\[/_]|^x$|^x\s*[(\[]",
    re.IGNORECASE,
)
_PHASE_NAME = re.compile(r"phase|phi\b|angle|\bdeg|°|\brad\b|\barg\b", re.IGNORECASE)
_REAL_NAME = re.compile(r"^re\b|^re[\s(\[_]|real", re.IGNORECASE)
_IMAG_NAME = re.compile(r"^im\b|^im[\s(\[_]|imag", re.IGNORECASE)
_OTHER_NAME = re.compile(
    r"^(?:index|idx|line|lines|bin|no\.?|nr\.?|#|n|time|t)$|coheren|^coh\b", re.IGNORECASE
)
_AMP_NAME = re.compile(
    r"amp|magn|^mag\b|level|value|psd|asd|spectrum|autopower|auto-power|power|pegel|"
    r"^y$|^y\s*[(\[]|acc|vel|disp|rms\b|peak|\bpk\b",
    re.IGNORECASE,
)
_ORDER_NAME = re.compile(r"\border", re.IGNORECASE)

# Frequency units: factor to Hz. Longest first so "kHz" is not read as "Hz".
_FREQ_UNITS = (
    ("khz", "kHz", 1e3),
    ("mhz", "MHz", 1e6),
    ("cpm", "cpm", 1 / 60),
    ("cyc/min", "cpm", 1 / 60),
    ("c/min", "cpm", 1 / 60),
    ("1/min", "cpm", 1 / 60),
    ("rpm", "cpm", 1 / 60),
    ("rad/s", "rad/s", 1 / (2 * math.pi)),
    ("hz", "Hz", 1.0),
)

# Amplitude units as written -> as shown. Checked on the text inside brackets, after
# "/" or "_", or the name's last word.
_AMP_UNITS = (
    (r"\(?m/s(?:\^2|²|2|\*\*2)\)?(?:\^2|²)/hz", "(m/s²)²/Hz"),
    (r"g(?:\^2|²|2)/hz", "g²/Hz"),
    (r"m/s(?:\^2|²|2|\*\*2)", "m/s²"),
    (r"mm/s", "mm/s"),
    (r"in/s|ips", "in/s"),
    (r"µm|μm|um", "µm"),
    (r"mils?", "mil"),
    (r"mv", "mV"),
    (r"v", "V"),
    (r"pa", "Pa"),
    (r"g(?:rms|pk|peak)?", "g"),
)
_UNIT_SPOTS = re.compile(r"[(\[]\s*([^)\]]+?)\s*[)\]]|/\s*([^\s/][^\s]*)$|[_\s]([^\s_]+)$")


def _names(table: Table) -> tuple[str, ...]:
    return table.names or tuple("" for _ in range(table.n_columns))


def _listing(table: Table) -> str:
    return ", ".join(table.column_label(i) for i in range(table.n_columns))


def _freq_unit(name: str, field_name: str) -> tuple[str, float]:
    low = name.lower()
    if _ORDER_NAME.search(low):
        raise InputError(
            f"the frequency column {name!r} is in orders; this service reads frequencies",
            field=field_name,
            value=name,
            code="unsupported_unit",
            remedy="Export the spectrum against frequency in Hz, kHz or cpm",
        )
    for token, unit, factor in _FREQ_UNITS:
        if re.search(rf"(?<![a-z]){re.escape(token)}(?![a-z])", low):
            return unit, factor
    return "Hz", 1.0


def _amplitude_unit(name: str) -> str | None:
    if not name:
        return None
    db = _DB.search(name)
    if db:
        rest = name[db.start() :].strip(" )]")
        return rest if rest.lower() != "db" else "dB"
    spots = [next(g for g in m.groups() if g is not None) for m in _UNIT_SPOTS.finditer(name)]
    for spot in [*spots, name]:
        spot = spot.strip().strip("()[]").strip().lower().replace(" ", "")
        for pattern, shown in _AMP_UNITS:
            if re.fullmatch(pattern, spot):
                return shown
    return None


def _pick_column(table: Table, choice: str | int, field_name: str) -> int:
    names = _names(table)
    if isinstance(choice, int) and not isinstance(choice, bool):
        if 0 <= choice < table.n_columns:
            return choice
    elif isinstance(choice, str):
        wanted = choice.strip().lower()
        exact = [i for i, n in enumerate(names) if n.lower() == wanted]
        if len(exact) == 1:
            return exact[0]
        if wanted.isdigit() and int(wanted) < table.n_columns:
            return int(wanted)
        part = [i for i, n in enumerate(names) if wanted and wanted in n.lower()]
        if len(part) == 1:
            return part[0]
    raise InputError(
        f"amplitude_column={choice!r} matches no single column; the columns are {_listing(table)}",
        field="amplitude_column",
        value=choice,
        code="unknown_column",
        remedy="Give amplitude_column as one of the names or 0-based numbers listed",
    )


def _choose_columns(
    table: Table, amplitude_column: str | int | None, field_name: str
) -> tuple[int, list[int], str]:
    """(frequency column, amplitude columns (one, or real and imaginary), why)."""
    names = _names(table)
    n = table.n_columns
    if n < 2:
        raise InputError(
            f"line {int(table.lines[0])} has 1 column; expected 2 or more ({_WHAT})",
            field=field_name,
            value=1,
            limit=2,
            code="too_few_columns",
            remedy="Give the frequency in the first column and the amplitude in another",
        )
    freq_named = [i for i, nm in enumerate(names) if nm and FREQ_NAME.search(nm)]
    freq_named = [i for i in freq_named if not _AMP_NAME.search(names[i]) or i == 0]
    fcol = freq_named[0] if freq_named else 0
    if amplitude_column is not None:
        col = _pick_column(table, amplitude_column, field_name)
        if col == fcol:
            raise InputError(
                f"amplitude_column={amplitude_column!r} is the frequency column",
                field="amplitude_column",
                value=amplitude_column,
                code="unknown_column",
                remedy=f"Choose another of {_listing(table)}",
            )
        return fcol, [col], "the request names it"
    rest = [i for i in range(n) if i != fcol]
    rest = [i for i in rest if not (names[i] and _PHASE_NAME.search(names[i]))]
    rest = [i for i in rest if not (names[i] and _OTHER_NAME.search(names[i].strip()))]
    real = [i for i in rest if names[i] and _REAL_NAME.search(names[i])]
    imag = [i for i in rest if names[i] and _IMAG_NAME.search(names[i])]
    if len(real) == 1 and len(imag) == 1:
        return fcol, [real[0], imag[0]], "real and imaginary columns"
    if len(rest) == 1:
        return fcol, rest, "the only value column"
    named = [i for i in rest if names[i] and _AMP_NAME.search(names[i])]
    if len(named) == 1:
        return fcol, named, "its name"
    listing = _listing(table)
    raise InputError(
        f"{len(rest)} columns could be the amplitude and no name settles it; the columns "
        f"are {listing}",
        field=field_name,
        value=[table.column_label(i) for i in rest],
        code="ambiguous_columns",
        remedy=(
            "Choose one with amplitude_column (a name or a 0-based number from the list), "
            "or give the file a header naming one column amplitude"
        ),
    )


def parse_spectrum_text(
    data: bytes | str,
    max_lines: int = DEFAULT_MAX_SPECTRUM_LINES,
    *,
    unit: str = "auto",
    amplitude_column: str | int | None = None,
    field: str = "file",
) -> ParsedSpectrum:
    """Read a spectrum (frequency, amplitude) from a text table.

    Parameters
    ----------
    data : bytes or str
        The text: comma-, semicolon-, tab- or space-separated; decimal point or comma;
        UTF-8 (with or without BOM), UTF-16 with BOM or Windows-1252; optional header
        block (``key: value`` lines) and column-name line; ``#`` comments.
    max_lines : int
        Largest accepted number of data lines, checked before parsing.
    unit : {"auto", "linear", "db"}
        The scale of the amplitude column; ``"auto"`` decides from the header, else from
        the values when they leave no doubt.
    amplitude_column : str or int, optional
        The amplitude column by name or 0-based number, when the header does not settle
        it.
    field : str
        The request field the text came in, named in errors (``file``, ``spectrum``).

    Returns
    -------
    ParsedSpectrum

    Raises
    ------
    InputError
        Codes: ``binary_content``, ``unreadable_encoding``, ``no_numeric_rows``,
        ``ragged_line``, ``not_a_number``, ``too_few_columns``, ``ambiguous_columns``,
        ``unknown_column``, ``unsupported_unit``, ``ambiguous_scale``,
        ``negative_amplitude``, ``negative_frequency``, ``unordered_frequency``,
        ``constant_amplitude``, ``too_few_lines``, ``above_limit``.

    Notes
    -----
    dB when the header says so (``dB``, ``dBV``, ``dB re 1 g``). From values alone: none
    negative is linear; most negative, or at least a fifth, is dB; a handful (at most 3
    or 1 % of the rows) is a data problem in a linear column, those rows are dropped
    and counted, provided the peaks stand at least 10 times above the median as linear
    spectra do (dB values above 0 span a factor of a few); anything else is an error
    asking for ``unit``.
    """
    max_lines = check_limit(max_lines, "max_lines")
    if unit not in ("auto", "linear", "db"):
        raise InputError(
            f"unit={unit!r} must be 'auto', 'linear' or 'db'",
            field="unit",
            value=unit,
            code="bad_choice",
        )
    raw = to_bytes(data, field)
    table = read_table(
        raw,
        max_lines=max_lines + ALLOWANCE,
        limit_text=f"{max_lines} data lines (plus {ALLOWANCE} other lines)",
        what=_WHAT,
        field_name=field,
    )
    notes = list(table.notes)
    names = _names(table)
    fcol, acols, why = _choose_columns(table, amplitude_column, field)
    fname = names[fcol]
    aname = " + ".join(names[i] for i in acols if names[i])
    freq_unit, factor = _freq_unit(fname, field)
    values = table.values
    freq = values[:, fcol] * factor
    if len(acols) == 2:
        amp = np.hypot(values[:, acols[0]], values[:, acols[1]])
        notes.append(
            f"The amplitude is the magnitude of columns {names[acols[0]]!r} (real) and "
            f"{names[acols[1]]!r} (imaginary)."
        )
    else:
        amp = values[:, acols[0]].copy()
    if table.n_columns > 2 and len(acols) == 1:
        notes.append(
            f"Amplitude read from column {table.column_label(acols[0])} ({why}); "
            f"the table has columns {_listing(table)}."
        )
    lines = table.lines
    finite = np.isfinite(freq) & np.isfinite(amp)
    dropped: dict[str, int] = {}
    if not np.all(finite):
        count = int(np.count_nonzero(~finite))
        dropped["non_finite"] = count
        first = int(lines[np.argmax(~finite)])
        notes.append(
            f"{plural(count, 'line')} without a finite number (NaN, inf, #N/A, empty "
            f"cell ...) left out, the first on line {first}."
        )
        freq, amp, lines = freq[finite], amp[finite], lines[finite]
    n = int(freq.size)
    if n > max_lines:
        raise InputError(
            f"the spectrum has {n} data lines; the limit is {max_lines}",
            field=field,
            value=n,
            limit=max_lines,
            code="above_limit",
            status=413,
        )
    amp_unit = _amplitude_unit(aname) if len(acols) == 1 else _amplitude_unit(names[acols[0]])
    scale, source, reason = _decide_scale(unit, table, fcol, acols, aname, amp_unit, amp, field)
    if scale == "linear":
        negative = bad_negative_cells(amp, reason, field)
        count = int(np.count_nonzero(negative))
        if count:
            dropped["negative"] = count
            first = int(lines[np.argmax(negative)])
            notes.append(
                f"{plural(count, 'negative amplitude')} in a linear column left out as "
                f"bad data, the first on line {first}."
            )
            keep = ~negative
            freq, amp, lines = freq[keep], amp[keep], lines[keep]
            n = int(freq.size)
    _check_spectrum(freq, amp, lines, field, freq_unit, factor)
    if freq_unit != "Hz":
        notes.append(f"Frequencies converted from {freq_unit} to Hz (column {fname!r}).")
    rate = table.sample_rate_hz
    if rate is not None:
        notes.append(f"The file's header gives a sample rate of {rate:g} Hz.")
    return ParsedSpectrum(
        freq_hz=np.ascontiguousarray(freq),
        amplitude=np.ascontiguousarray(amp),
        unit=scale,
        unit_reason=reason,
        n_lines=n,
        header=table.names,
        scale_source=source,
        freq_unit=freq_unit,
        amplitude_unit=amp_unit if amp_unit is not None else _metadata_unit(table.metadata),
        frequency_column=table.column_label(fcol),
        amplitude_column=" + ".join(table.column_label(i) for i in acols),
        metadata=table.metadata,
        sample_rate_hz=rate,
        dropped=dropped,
        notes=tuple(dict.fromkeys(notes)),
        format_description=f"{table.encoding}, {table.dialect.describe()}",
    )


def _metadata_unit(metadata: dict[str, str]) -> str | None:
    for key, value in metadata.items():
        if re.search(r"unit|einheit|unité", key, re.IGNORECASE) and value:
            return value
    return None


def _decide_scale(
    unit: str,
    table: Table,
    fcol: int,
    acols: list[int],
    aname: str,
    amp_unit: str | None,
    amp: NDArray[np.float64],
    field_name: str,
) -> tuple[str, str, str]:
    """(scale, source, reason)."""
    if unit != "auto":
        word = "dB" if unit == "db" else "linear"
        return unit, "request", f"the request says the values are {word}"
    if len(acols) == 2:
        return "linear", "header", "real and imaginary parts are linear"
    if aname and _DB.search(aname):
        return "db", "header", f"the amplitude column header {aname!r} names a dB unit"
    munit = _metadata_unit(table.metadata)
    if amp_unit is None and munit and _DB.search(munit):
        return "db", "header", f"the header block gives the unit {munit!r}"
    scale, reason = detect_unit(amp, field_name)
    return scale, "values", reason


def _check_spectrum(
    freq: NDArray[np.float64],
    amp: NDArray[np.float64],
    lines: NDArray[np.int64],
    field_name: str,
    freq_unit: str,
    factor: float,
) -> None:
    n = int(freq.size)
    if n < 3:
        raise InputError(
            f"the spectrum has {n} data lines; at least 3 are needed",
            field=field_name,
            value=n,
            limit=3,
            code="too_few_lines",
        )
    shown = (
        (lambda v: f"{v / factor:g} {freq_unit}") if freq_unit != "Hz" else (lambda v: f"{v:g} Hz")
    )
    if np.any(freq < 0):
        i = int(np.argmax(freq < 0))
        raise InputError(
            f"line {int(lines[i])}: frequency {shown(freq[i])} is negative",
            field=field_name,
            value=float(freq[i]),
            limit=0,
            code="negative_frequency",
        )
    steps = np.diff(freq)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0)) + 1
        before, here = int(lines[i - 1]), int(lines[i])
        if steps[i - 1] == 0:
            raise InputError(
                f"line {here}: frequency {shown(freq[i])} repeats line {before}; each "
                "frequency must appear once",
                field=field_name,
                value=float(freq[i]),
                code="unordered_frequency",
            )
        raise InputError(
            f"line {here}: frequency {shown(freq[i])} is lower than {shown(freq[i - 1])} "
            f"on line {before}; frequencies must increase",
            field=field_name,
            value=float(freq[i]),
            code="unordered_frequency",
            remedy="Sort the table by frequency, lowest first",
        )
    if np.all(amp == amp[0]):
        raise InputError(
            f"the amplitude is constant ({amp[0]:g} on every line); no peaks",
            field=field_name,
            code="constant_amplitude",
            remedy="Check that the right column was read (amplitude_column)",
        )

"""Parsing of uploaded spectra and time records into plain arrays for the core.

Not part of the numeric core: this module may use pandas. Every failure is a
``ValueError`` whose message names the line, column or field and the limit, so the API
can hand it to a person unchanged.

Accepted inputs
---------------
* Spectrum text: two columns (frequency in Hz, amplitude) separated by commas,
  semicolons, tabs or spaces; an optional header line; ``#`` starts a comment; decimal
  point only.
* Time record: WAV (PCM 8/16/24/32-bit integer, 32/64-bit IEEE float, also as
  WAVE_FORMAT_EXTENSIBLE), NumPy ``.npy`` (1-D, or 2-D with one column or row per
  channel) or text/CSV with one column of samples per channel.
"""

from __future__ import annotations

import csv
import io
import re
import struct
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from numpy.typing import NDArray

from service.core.spectrum import detect_unit

__all__ = [
    "DEFAULT_MAX_SAMPLES",
    "DEFAULT_MAX_SPECTRUM_LINES",
    "ParsedSpectrum",
    "TimeRecord",
    "parse_spectrum_text",
    "parse_time_record",
]

DEFAULT_MAX_SPECTRUM_LINES = 2_000_000
DEFAULT_MAX_SAMPLES = 50_000_000

_TEXT_EXTENSIONS = (".csv", ".txt", ".tsv", ".dat", ".asc")
_ACCEPTED_TYPES = (
    "WAV (.wav), NumPy array (.npy) or text/CSV with one column of samples per channel "
    "(.csv, .txt, .tsv, .dat, .asc)"
)
_DB_HEADER = re.compile(r"(?<![a-z])db", re.IGNORECASE)
_COMMENT = re.compile(rb"#[^\n]*")
_SNIFF_LINES = 20
_ALLOWANCE = 1000  # header and comment lines allowed beyond the data-line limit
_BLOCK_ROWS = 50_000  # lines per block when searching for a bad line


@dataclass(frozen=True, eq=False)
class ParsedSpectrum:
    """A spectrum read from text.

    Attributes
    ----------
    freq_hz : ndarray
        Frequencies, Hz, strictly increasing, >= 0.
    amplitude : ndarray
        Values as written (linear amplitude or dB, see ``unit``).
    unit : str
        ``"linear"`` or ``"db"``.
    unit_reason : str
        Why the unit was chosen (header or value heuristic).
    n_lines : int
        Number of data lines read.
    header : tuple of str
        Column names from the header line, empty when there is none.
    """

    freq_hz: NDArray[np.float64]
    amplitude: NDArray[np.float64]
    unit: str
    unit_reason: str
    n_lines: int
    header: tuple[str, ...] = ()


@dataclass(frozen=True, eq=False)
class TimeRecord:
    """One channel of a time record.

    Attributes
    ----------
    samples : ndarray
        1-D samples, float32 (16/24-bit PCM, float32 data) or float64. Integer PCM is
        scaled to ±1.0 full scale.
    sample_rate_hz : float
        Sample rate, Hz.
    channel : int
        Index of the chosen channel (0-based).
    n_channels : int
        Number of channels in the file.
    format_description : str
        What was read, e.g. "WAV, PCM 24-bit, 2 channels, 48000 Hz".
    """

    samples: NDArray[np.floating]
    sample_rate_hz: float
    channel: int
    n_channels: int
    format_description: str

    @property
    def n_samples(self) -> int:
        return int(self.samples.size)


# --------------------------------------------------------------------------- helpers


def _to_bytes(data: bytes | bytearray | memoryview | str, name: str = "data") -> bytes:
    if isinstance(data, str):
        return data.encode("utf-8")
    if isinstance(data, bytes | bytearray | memoryview):
        return bytes(data)
    raise ValueError(f"{name} must be bytes or text; got {type(data).__name__}")


def _check_limit(value: int, name: str) -> int:
    if isinstance(value, bool) or int(value) != value or int(value) < 1:
        raise ValueError(f"{name}={value!r} must be a whole number >= 1")
    return int(value)


def _strip_comment(line: str) -> str:
    return line.split("#", 1)[0].strip()


def _split(line: str, sep: str | None) -> list[str]:
    if sep is None:
        return line.split()
    return [part.strip() for part in line.split(sep)]


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return "_" not in text


_DECIMAL_COMMA = re.compile(r"[+-]?\d+,\d+([eE][+-]?\d+)?")
_FIELD_COUNT = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")


def _looks_numeric(text: str) -> bool:
    """A number, or a number written with a decimal comma (data, not a header)."""
    return _is_number(text) or _DECIMAL_COMMA.fullmatch(text) is not None


def _sniff(lines: list[str]) -> str | None:
    """Separator found in most sample lines: tab, comma, semicolon, else whitespace."""
    for sep in ("\t", ",", ";"):
        if 2 * sum(sep in line for line in lines) > len(lines):
            return sep
    return None


def _first_lines(data: bytes) -> list[tuple[int, str]]:
    """Up to ``_SNIFF_LINES + 1`` non-blank, non-comment lines with 1-based numbers."""
    found: list[tuple[int, str]] = []
    pos, number = 0, 0
    while pos < len(data) and len(found) <= _SNIFF_LINES:
        end = data.find(b"\n", pos)
        end = len(data) if end < 0 else end
        number += 1
        content = _strip_comment(data[pos:end].decode("utf-8", errors="replace"))
        if content:
            found.append((number, content))
        pos = end + 1
    return found


def _plural(count: int, word: str) -> str:
    return f"{count} {word}" + ("" if count == 1 else "s")


def _describe_field(number: int, column: int, cell: str) -> str:
    if not cell:
        return f"line {number}, column {column} is empty"
    if _DECIMAL_COMMA.fullmatch(cell):
        return (
            f"line {number}, column {column}: {cell!r} uses a decimal comma; "
            "write numbers with a decimal point"
        )
    if not _is_number(cell):
        return f"line {number}, column {column}: {cell!r} is not a number"
    return f"line {number}, column {column}: {cell!r} is not a finite number"


@dataclass
class _Table:
    """Numeric columns read from text, with what is needed to name a line in errors."""

    body: bytes  # text after the header line, comments removed, line breaks kept
    sep: str | None
    columns: int
    header: tuple[str, ...]
    header_line: int  # 1-based line number of the header, 0 without one
    what: str
    values: NDArray[np.float64] = field(default_factory=lambda: np.empty((0, 0)))

    def _read(self, **options: object) -> pd.DataFrame:
        return pd.read_csv(
            io.BytesIO(self.body),
            sep=r"\s+" if self.sep is None else self.sep,
            header=None,
            names=list(range(self.columns)),
            index_col=False,
            engine="c",
            skipinitialspace=True,
            encoding="latin-1",
            quoting=csv.QUOTE_NONE,
            **options,
        )

    def _field_count_message(self, exc: Exception) -> str | None:
        match = _FIELD_COUNT.search(str(exc))
        if match is None:
            return None
        number = self.header_line + int(match.group(2))
        return self._count_message(number, int(match.group(3)))

    def _count_message(self, number: int, count: int) -> str:
        sep_name = {None: "whitespace", "\t": "tab", ",": "comma", ";": "semicolon"}[self.sep]
        return (
            f"line {number} has {_plural(count, 'column')}; expected {self.columns} "
            f"({self.what}) separated by {sep_name}"
        )

    def parse(self) -> None:
        """Fast path: pandas' C parser straight to float64; word the first failure."""
        try:
            frame = self._read(dtype=np.float64, skip_blank_lines=True)
            self.values = frame.to_numpy(dtype=np.float64)
            if np.all(np.isfinite(self.values)):
                return
        except pd.errors.ParserError as exc:
            raise ValueError(self._field_count_message(exc) or str(exc).strip()) from None
        except ValueError:
            pass
        raise ValueError(self._first_bad_line())

    def _first_bad_line(self) -> str:
        """Find the first bad line in blocks of rows, one row per line (slow path)."""
        reader = self._read(dtype=np.float64, skip_blank_lines=False, chunksize=_BLOCK_ROWS)
        first = 0
        try:
            for chunk in reader:
                values = chunk.to_numpy(dtype=np.float64)
                blank = np.all(np.isnan(values), axis=1)
                bad = np.flatnonzero(np.any(~np.isfinite(values), axis=1) & ~blank)
                if bad.size:
                    row = first + int(bad[0])
                    return self._describe_lines(row, row + 1)
                first += values.shape[0]
        except pd.errors.ParserError as exc:
            return self._field_count_message(exc) or str(exc).strip()
        except ValueError:
            return self._describe_lines(first, first + _BLOCK_ROWS)
        finally:
            reader.close()
        return f"cannot read the text as numbers ({self.what})"

    def _describe_lines(self, first: int, stop: int) -> str:
        """Word the first bad line among body lines ``first`` to ``stop - 1`` (0-based)."""
        breaks = np.flatnonzero(np.frombuffer(self.body, dtype=np.uint8) == 10)
        begin = 0 if first == 0 else int(breaks[first - 1]) + 1
        end = int(breaks[stop - 1]) if stop - 1 < breaks.size else len(self.body)
        segment = self.body[begin:end].decode("latin-1").split("\n")
        for offset, raw in enumerate(segment):
            content = raw.strip()
            if not content:
                continue
            number = self.header_line + first + offset + 1
            cells = _split(content, self.sep)
            if len(cells) != self.columns:
                return self._count_message(number, len(cells))
            for column, cell in enumerate(cells, start=1):
                if not _is_number(cell) or not np.isfinite(float(cell)):
                    return _describe_field(number, column, cell)
        return f"cannot read lines {first + 1}-{stop} as numbers ({self.what})"

    def line_numbers(self, rows: NDArray[np.int64]) -> NDArray[np.int64]:
        """1-based line numbers of data rows (slow path, only to word errors)."""
        values = self._read(dtype=np.float64, skip_blank_lines=False).to_numpy(np.float64)
        data_rows = np.flatnonzero(~np.all(np.isnan(values), axis=1))
        out: NDArray[np.int64] = self.header_line + data_rows[rows] + 1
        return out


def _read_table(
    data: bytes, max_lines: int, n_columns: int | None, what: str, limit: str
) -> _Table:
    """Parse numeric columns with pandas' C engine (``n_columns=None``: any fixed count)."""
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    n_raw = data.count(b"\n") + (0 if data.endswith(b"\n") or not data else 1)
    if n_raw > max_lines + _ALLOWANCE:
        raise ValueError(f"the text has {n_raw} lines; the limit is {limit}")
    sample = _first_lines(data)
    if not sample:
        raise ValueError(f"no data lines: expected {what}, one line per value")
    lines = [content for _, content in sample]
    sep = _sniff(lines)
    header: tuple[str, ...] = ()
    header_line = 0
    if not all(_looks_numeric(f) for f in _split(lines[0], sep)):
        header_sep = sep if sep is not None and sep in lines[0] else _sniff(lines[:1])
        header = tuple(f.strip().strip("\"'") for f in _split(lines[0], header_sep))
        header_line = sample[0][0]
        sample = sample[1:]
        if not sample:
            raise ValueError(f"no data lines after the header: expected {what}")
    columns = n_columns if n_columns is not None else len(_split(sample[0][1], sep))
    body = data
    if header_line:
        cut = 0
        for _ in range(header_line):
            cut = body.index(b"\n", cut) + 1
        body = body[cut:]
    if b"#" in body:
        body = _COMMENT.sub(b"", body)
    table = _Table(body, sep, columns, header, header_line, what)
    table.parse()
    return table


# --------------------------------------------------------------------------- spectrum


def parse_spectrum_text(
    data: bytes | str, max_lines: int = DEFAULT_MAX_SPECTRUM_LINES
) -> ParsedSpectrum:
    """Read a two-column spectrum (frequency in Hz, amplitude) from text.

    Parameters
    ----------
    data : bytes or str
        The text: comma-, semicolon-, tab- or whitespace-separated, optional header line,
        ``#`` comments, decimal point, UTF-8 (a byte-order mark is ignored).
    max_lines : int
        Largest accepted number of lines (all lines, comments included), checked before
        parsing.

    Returns
    -------
    ParsedSpectrum

    Raises
    ------
    ValueError
        Empty text, wrong column count, non-numeric or non-finite cell, negative,
        duplicate or decreasing frequency, constant amplitude, too many lines — naming
        the first offending line.

    Notes
    -----
    The unit is dB when the amplitude column's header contains "dB" (dB, dBV, dBg,
    "(dB)" ...), otherwise :func:`service.core.spectrum.detect_unit` decides from the
    values (any negative value means dB).
    """
    max_lines = _check_limit(max_lines, "max_lines")
    raw = _to_bytes(data)
    what = "frequency in Hz and amplitude"
    table = _read_table(
        raw, max_lines, 2, what, f"{max_lines} data lines (plus {_ALLOWANCE} other lines)"
    )
    values, header = table.values, table.header
    freq = np.ascontiguousarray(values[:, 0])
    amp = np.ascontiguousarray(values[:, 1])
    n = freq.size
    if n > max_lines:
        raise ValueError(f"the spectrum has {n} data lines; the limit is {max_lines}")

    def line_of(row: int) -> int:
        return int(table.line_numbers(np.array([row]))[0])

    if n < 3:
        raise ValueError(f"the spectrum has {n} data lines; at least 3 are needed")
    if np.any(freq < 0):
        i = int(np.argmax(freq < 0))
        raise ValueError(f"line {line_of(i)}: frequency {freq[i]:g} Hz is negative")
    steps = np.diff(freq)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0)) + 1
        before, here = (int(v) for v in table.line_numbers(np.array([i - 1, i])))
        if steps[i - 1] == 0:
            raise ValueError(
                f"line {here}: frequency {freq[i]:g} Hz repeats line {before}; "
                "each frequency must appear once"
            )
        raise ValueError(
            f"line {here}: frequency {freq[i]:g} Hz is lower than {freq[i - 1]:g} Hz "
            f"on line {before}; frequencies must increase"
        )
    if np.all(amp == amp[0]):
        raise ValueError(f"the amplitude is constant ({amp[0]:g} on every line); no peaks")
    unit_header = header[1] if len(header) == 2 else " ".join(header[1:])
    if unit_header and _DB_HEADER.search(unit_header):
        unit, reason = "db", f"the amplitude column header {unit_header!r} names a dB unit"
    else:
        unit, reason = detect_unit(amp)
    return ParsedSpectrum(
        freq_hz=freq, amplitude=amp, unit=unit, unit_reason=reason, n_lines=n, header=header
    )


# --------------------------------------------------------------------------- time records


def _check_channel(channel: int, n_channels: int) -> int:
    if isinstance(channel, bool) or int(channel) != channel:
        raise ValueError(f"channel={channel!r} must be a whole number")
    if not 0 <= int(channel) < n_channels:
        plural = "channel" if n_channels == 1 else "channels"
        raise ValueError(
            f"channel={channel} but the file has {n_channels} {plural} "
            f"(valid: 0 to {n_channels - 1})"
        )
    return int(channel)


def _check_rate(sample_rate_hz: float | None, kind: str) -> float:
    if sample_rate_hz is None:
        raise ValueError(f"sample_rate_hz is required for {kind}: the file does not carry it")
    rate = float(sample_rate_hz)
    if not np.isfinite(rate) or rate <= 0:
        raise ValueError(f"sample_rate_hz={sample_rate_hz!r} must be a finite number > 0")
    return rate


def _check_samples(x: NDArray[np.floating], channel: int) -> None:
    bad = ~np.isfinite(x)
    if np.any(bad):
        i = int(np.argmax(bad))
        raise ValueError(
            f"sample {i} of channel {channel} is {float(x[i])!r}; samples must be finite"
        )
    if x.size < 2:
        raise ValueError(f"channel {channel} has {x.size} samples; at least 2 are needed")
    if np.all(x == x[0]):
        raise ValueError(
            f"channel {channel} is constant (every sample = {x[0]:g}); nothing to analyse "
            "(wrong channel?)"
        )


_WAVE_PCM = 1
_WAVE_FLOAT = 3
_WAVE_EXTENSIBLE = 0xFFFE


def _read_wav(
    data: bytes, sample_rate_hz: float | None, channel: int, max_samples: int
) -> TimeRecord:
    """Minimal RIFF/WAVE reader: fmt and data chunks, other chunks skipped."""
    if len(data) < 12:
        raise ValueError(f"WAV header is truncated: {len(data)} bytes, the RIFF header needs 12")
    if data[:4] != b"RIFF" or data[8:12] != b"WAVE":
        kind = data[:4].decode("latin-1")
        raise ValueError(f"not a RIFF/WAVE file (starts with {kind!r}); RF64/RIFX are not read")
    pos = 12
    fmt: tuple[int, int, int, int, int] | None = None
    fmt_name = ""
    while True:
        if pos + 8 > len(data):
            if fmt is None:
                raise ValueError("WAV header is truncated: no complete 'fmt ' chunk")
            raise ValueError("WAV file has no 'data' chunk")
        chunk_id = data[pos : pos + 4]
        (size,) = struct.unpack_from("<I", data, pos + 4)
        body_start = pos + 8
        remaining = len(data) - body_start
        if chunk_id == b"fmt ":
            if size < 16 or remaining < 16:
                raise ValueError(
                    f"WAV header is truncated: 'fmt ' chunk has {min(size, remaining)} "
                    "bytes, at least 16 are needed"
                )
            tag, n_ch, rate, _byte_rate, block_align, bits = struct.unpack_from(
                "<HHIIHH", data, body_start
            )
            if tag == _WAVE_EXTENSIBLE:
                if size < 40 or remaining < 40:
                    raise ValueError(
                        "WAV header is truncated: WAVE_FORMAT_EXTENSIBLE 'fmt ' chunk needs "
                        f"40 bytes, has {min(size, remaining)}"
                    )
                (tag,) = struct.unpack_from("<H", data, body_start + 24)
                fmt_name = "extensible "
            fmt = (tag, n_ch, rate, block_align, bits)
        elif chunk_id == b"data":
            if fmt is None:
                raise ValueError("WAV 'data' chunk comes before the 'fmt ' chunk")
            if size > remaining:
                raise ValueError(
                    f"WAV data chunk says {size} bytes but only {remaining} follow "
                    "(truncated file or wrong header)"
                )
            payload = memoryview(data)[body_start : body_start + size]
            break
        pos = body_start + size + (size & 1)

    tag, n_ch, rate, block_align, bits = fmt
    if tag == _WAVE_PCM and bits in (8, 16, 24, 32):
        kind = f"PCM {bits}-bit"
    elif tag == _WAVE_FLOAT and bits in (32, 64):
        kind = f"float {bits}-bit"
    else:
        raise ValueError(
            f"WAV format tag {tag} with {bits} bits per sample is not supported; "
            "use PCM 8/16/24/32-bit or IEEE float 32/64-bit"
        )
    width = bits // 8
    if n_ch < 1 or block_align != n_ch * width:
        raise ValueError(
            f"WAV header is inconsistent: {n_ch} channels of {bits} bits need block "
            f"align {n_ch * width}, header says {block_align}"
        )
    channel = _check_channel(channel, n_ch)
    n_frames = len(payload) // block_align
    if n_frames > max_samples:
        raise ValueError(f"WAV has {n_frames} samples per channel; the limit is {max_samples}")
    if n_frames < 2:
        raise ValueError(f"WAV has {n_frames} samples per channel; at least 2 are needed")
    if rate <= 0 and sample_rate_hz is None:
        raise ValueError("WAV header gives a sample rate of 0 Hz; pass sample_rate_hz")
    if sample_rate_hz is not None:
        fs = _check_rate(sample_rate_hz, "WAV")
        rate_note = f", sample rate {fs:g} Hz given (header says {rate} Hz)"
    else:
        fs = float(rate)
        rate_note = f", {rate} Hz"
    raw = np.frombuffer(payload, dtype=np.uint8, count=n_frames * block_align)
    frames = raw.reshape(n_frames, n_ch, width)[:, channel, :]
    x: NDArray[np.floating]
    if kind.startswith("float"):
        x = np.ascontiguousarray(frames).view(f"<f{width}").reshape(n_frames)
        x = x.astype(np.float32 if width == 4 else np.float64)
    elif bits == 8:
        x = (frames[:, 0].astype(np.float32) - 128.0) / 128.0
    elif bits == 16:
        x = np.ascontiguousarray(frames).view("<i2").reshape(n_frames).astype(np.float32)
        x *= np.float32(1.0 / 32768.0)
    elif bits == 24:
        value = (
            frames[:, 0].astype(np.int32)
            | (frames[:, 1].astype(np.int32) << 8)
            | (frames[:, 2].astype(np.int32) << 16)
        )
        value = (value << 8) >> 8  # sign-extend from 24 bits
        x = value.astype(np.float32) * np.float32(1.0 / 8388608.0)
    else:
        x = np.ascontiguousarray(frames).view("<i4").reshape(n_frames) / 2147483648.0
    _check_samples(x, channel)
    plural = "channel" if n_ch == 1 else "channels"
    return TimeRecord(
        samples=x,
        sample_rate_hz=fs,
        channel=channel,
        n_channels=n_ch,
        format_description=f"WAV, {fmt_name}{kind}, {n_ch} {plural}{rate_note}",
    )


def _read_npy(
    data: bytes, sample_rate_hz: float | None, channel: int, max_samples: int
) -> TimeRecord:
    fs = _check_rate(sample_rate_hz, "a .npy array")
    stream = io.BytesIO(data)
    try:
        version = np.lib.format.read_magic(stream)
        if version == (1, 0):
            shape, _fortran, dtype = np.lib.format.read_array_header_1_0(stream)
        elif version == (2, 0):
            shape, _fortran, dtype = np.lib.format.read_array_header_2_0(stream)
        else:  # newer header versions: read the array, then check
            stream.seek(0)
            probe = np.load(stream, allow_pickle=False)
            shape, dtype = probe.shape, probe.dtype
    except (ValueError, EOFError, OSError) as exc:
        raise ValueError(f".npy header cannot be read: {exc}") from exc
    if dtype.kind not in "iuf":
        raise ValueError(f".npy array has dtype {dtype}; real integers or floats are needed")
    if len(shape) not in (1, 2):
        raise ValueError(f".npy array has shape {shape}; 1-D or 2-D (samples × channels)")
    n_samples = max(shape) if len(shape) == 2 else shape[0]
    if n_samples > max_samples:
        raise ValueError(
            f".npy array has {n_samples} samples per channel; the limit is {max_samples}"
        )
    stream.seek(0)
    try:
        arr = np.load(stream, allow_pickle=False)
    except (ValueError, EOFError, OSError) as exc:
        raise ValueError(f".npy data cannot be read: {exc}") from exc
    if arr.ndim == 1:
        n_ch = 1
        channel = _check_channel(channel, 1)
        column = arr
    else:
        # The longer axis is time: (samples, channels) or (channels, samples).
        by_rows = arr.shape[0] >= arr.shape[1]
        n_ch = int(arr.shape[1] if by_rows else arr.shape[0])
        channel = _check_channel(channel, n_ch)
        column = arr[:, channel] if by_rows else arr[channel, :]
    target = np.float32 if dtype == np.float32 else np.float64
    x = np.ascontiguousarray(column, dtype=target)
    _check_samples(x, channel)
    plural = "channel" if n_ch == 1 else "channels"
    return TimeRecord(
        samples=x,
        sample_rate_hz=fs,
        channel=channel,
        n_channels=n_ch,
        format_description=f"NumPy array {dtype} shape {tuple(shape)}, {n_ch} {plural}",
    )


def _read_text_samples(
    data: bytes, sample_rate_hz: float | None, channel: int, max_samples: int
) -> TimeRecord:
    fs = _check_rate(sample_rate_hz, "text samples")
    table = _read_table(
        data,
        max_samples,
        None,
        "one column of samples per channel",
        f"{max_samples} samples (plus {_ALLOWANCE} other lines)",
    )
    values, header = table.values, table.header
    n_ch = values.shape[1]
    if values.shape[0] > max_samples:
        raise ValueError(f"the text has {values.shape[0]} samples; the limit is {max_samples}")
    channel = _check_channel(channel, n_ch)
    x = np.ascontiguousarray(values[:, channel])
    _check_samples(x, channel)
    plural = "column" if n_ch == 1 else "columns"
    named = f", column {header[channel]!r}" if header else ""
    return TimeRecord(
        samples=x,
        sample_rate_hz=fs,
        channel=channel,
        n_channels=n_ch,
        format_description=f"text, {n_ch} {plural}{named}",
    )


def parse_time_record(
    data: bytes,
    filename: str,
    sample_rate_hz: float | None = None,
    channel: int = 0,
    max_samples: int = DEFAULT_MAX_SAMPLES,
) -> TimeRecord:
    """Read one channel of a time record from an uploaded file.

    Parameters
    ----------
    data : bytes
        File contents.
    filename : str
        Original file name; its extension decides the type unless the content starts
        with a RIFF/WAVE or NumPy signature.
    sample_rate_hz : float, optional
        Sample rate, Hz. Required for .npy and text; for WAV it overrides the header.
    channel : int
        Channel to return, 0-based.
    max_samples : int
        Largest accepted number of samples per channel, checked from the header before
        the samples are decoded.

    Returns
    -------
    TimeRecord

    Raises
    ------
    ValueError
        Unknown type (naming the accepted ones), broken or lying header, missing sample
        rate, channel out of range, non-finite or constant samples, size over the limit.

    Notes
    -----
    Integer PCM is scaled to ±1.0 full scale (÷ 2**(bits-1); 8-bit is offset binary).
    16/24-bit PCM and float32 data come back as float32, 32-bit PCM and float64 as
    float64. A 2-D .npy array is read as (samples, channels) when it has at least as
    many rows as columns, else as (channels, samples).
    """
    raw = _to_bytes(data)
    max_samples = _check_limit(max_samples, "max_samples")
    name = (filename or "").lower()
    if raw[:4] in (b"RIFF", b"RIFX", b"RF64") or name.endswith((".wav", ".wave")):
        return _read_wav(raw, sample_rate_hz, channel, max_samples)
    if raw[:6] == b"\x93NUMPY" or name.endswith(".npy"):
        return _read_npy(raw, sample_rate_hz, channel, max_samples)
    if name.endswith(_TEXT_EXTENSIONS):
        return _read_text_samples(raw, sample_rate_hz, channel, max_samples)
    raise ValueError(f"file {filename!r} is of an unknown type; accepted: {_ACCEPTED_TYPES}")

"""One simulated spectrum written out the ways recorders and analysers export spectra.

The spectrum comes from the project's simulator (``tests/core/simulate.py``: tones
sampled with numpy, spectrum from :mod:`service.core.spectrum`); nothing here is the
reader's output. Each form says what a correct reader must return, in terms of the
simulated arrays, so tests compare the reader against the simulation, never against
itself.
"""

from __future__ import annotations

import codecs
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cache

import numpy as np

from tests.core.simulate import SimChain, simulate_capture

__all__ = ["FORMS", "Form", "clean_spectrum"]

FS = 12_800.0
# Demo scenario (invented): a 10 kHz inverter carrier folds to 2.8 kHz at 12.8 kS/s.
TONES = ((440.0, 0.5), (1_800.0, 0.2), (10_000.0, 0.05))


@cache
def clean_spectrum() -> tuple[np.ndarray, np.ndarray]:
    """(frequency Hz, linear amplitude) of one simulated capture, 801 lines."""
    cap = simulate_capture(TONES, SimChain(rate_hz=FS), 1.0, noise_rms=1e-3, seed=12, lines=800)
    return cap.spectrum.freq_hz.copy(), cap.spectrum.amplitude.copy()


@dataclass(frozen=True)
class Form:
    """One export form.

    ``make()`` returns the file bytes. ``keep`` is the boolean mask of simulated lines a
    correct reader keeps (None: all). ``error`` is the InputError code expected instead
    of a spectrum. ``db`` says the file holds 20·log10 of the amplitude.
    """

    name: str
    make: Callable[[], bytes]
    keep: Callable[[], np.ndarray] | None = None
    error: str | None = None
    db: bool = False
    amplitude_unit: str | None = None
    freq_unit: str = "Hz"
    kwargs: dict[str, object] = field(default_factory=dict)
    sample_rate_hz: float | None = None


def _num(values: np.ndarray, fmt: str = "{:.12g}") -> list[str]:
    return [fmt.format(float(v)) for v in values]


def _table(header: str | None, columns: list[list[str]], sep: str = ",", eol: str = "\n") -> str:
    rows = [sep.join(cells) for cells in zip(*columns, strict=True)]
    return eol.join(([header] if header is not None else []) + rows) + eol


def _fa(freq_fmt: str = "{:.12g}") -> tuple[list[str], list[str]]:
    f, a = clean_spectrum()
    return _num(f, freq_fmt), _num(a)


def _clean() -> bytes:
    f, a = _fa()
    return _table("frequency_hz,amplitude_g", [f, a]).encode()


def _semicolon_comma() -> bytes:
    f, a = _fa()
    swap = str.maketrans(".", ",")
    return _table(
        "Frequenz [Hz];Amplitude [g]",
        [[x.translate(swap) for x in f], [x.translate(swap) for x in a]],
        ";",
    ).encode("cp1252")


def _tab() -> bytes:
    f, a = _fa()
    return _table("Frequency (Hz)\tAmplitude (g)", [f, a], "\t").encode()


def _spaces() -> bytes:
    f, a = clean_spectrum()
    rows = [f"{x:14.6f}  {y:18.10e}" for x, y in zip(f, a, strict=True)]
    return ("  Frequency (Hz)      Amplitude (g)\n" + "\n".join(rows) + "\n").encode()


def _encoded(bom: bytes, codec: str) -> Callable[[], bytes]:
    def make() -> bytes:
        f, a = _fa()
        return bom + _table("Frequency (Hz),Amplitude (g)", [f, a]).encode(codec)

    return make


def _crlf() -> bytes:
    f, a = _fa()
    return _table("Frequency (Hz),Amplitude (g)", [f, a], eol="\r\n").encode()


def _metadata() -> bytes:
    f, a = _fa()
    block = (
        "Title: bench 3, drive unit EOL\n"
        "Sample rate: 12.8 kHz\n"
        "Averages=10\n"
        "Window;Hann\n"
        "# exported by a made-up recorder\n"
        "\n"
    )
    return (block + _table("Frequency (Hz),Amplitude (g)", [f, a])).encode()


def _analyser_block() -> bytes:
    f, a = _fa()
    block = (
        "[Header]\nDevice\tanalyser 1\nChannel\t2\nSampling frequency\t12800 Hz\nUnit\tg\n[Data]\n"
    )
    return (block + _table("Hz\tg", [f, a], "\t")).encode()


def _quoted() -> bytes:
    f, a = _fa()
    return _table(
        '"Frequency (Hz)","Amplitude (g)"', [[f'"{x}"' for x in f], [f'"{x}"' for x in a]]
    ).encode()


def _quoted_decimal_comma() -> bytes:
    f, a = _fa()
    swap = str.maketrans(".", ",")
    cols = [[f'"{x.translate(swap)}"' for x in f], [f'"{x.translate(swap)}"' for x in a]]
    return _table('"Frequency (Hz)","Amplitude (g)"', cols).encode()


def _thousands() -> bytes:
    f, a = clean_spectrum()
    return _table("Frequency (Hz);Amplitude (g)", [[f"{x:,.6f}" for x in f], _num(a)], ";").encode()


def _thousands_european() -> bytes:
    f, a = clean_spectrum()
    swap = str.maketrans(",.", ".,")
    fs = [f"{x:,.6f}".translate(swap) for x in f]
    return _table(
        "Frequency (Hz);Amplitude (g)", [fs, [x.translate(swap) for x in _num(a)]], ";"
    ).encode()


def _khz() -> bytes:
    f, a = clean_spectrum()
    return _table("Frequency (kHz),Amplitude (g)", [_num(f / 1000), _num(a)]).encode()


def _cpm() -> bytes:
    f, a = clean_spectrum()
    return _table("Frequency (CPM),Velocity (mm/s)", [_num(f * 60), _num(a)]).encode()


def _phase() -> bytes:
    f, a = _fa()
    phase = np.random.default_rng(3).uniform(-180, 180, len(f))
    return _table("Frequency (Hz),Phase (deg),Amplitude (g)", [f, _num(phase), a]).encode()


def _real_imag() -> bytes:
    freq, amp = clean_spectrum()
    phi = np.random.default_rng(4).uniform(-np.pi, np.pi, freq.size)
    return _table(
        "Frequency (Hz),Real (g),Imag (g)",
        [_num(freq), _num(amp * np.cos(phi), "{:.15g}"), _num(amp * np.sin(phi), "{:.15g}")],
    ).encode()


def _db() -> bytes:
    freq, amp = clean_spectrum()
    return _table(
        "Frequency (Hz),Level (dB re 1 g)", [_num(freq), _num(20 * np.log10(amp))]
    ).encode()


_MARKERS = ("nan", "NaN", "inf", "-inf", "-1.#INF", "1.#QNAN", "1.#IND", "#N/A", "N/A", "")
_MARKED_ROWS = np.arange(len(_MARKERS)) * 71 + 13


def _marked_keep() -> np.ndarray:
    keep = np.ones(clean_spectrum()[0].size, dtype=bool)
    keep[_MARKED_ROWS] = False
    return keep


def _non_finite() -> bytes:
    f, a = _fa()
    for row, marker in zip(_MARKED_ROWS, _MARKERS, strict=True):
        a[row] = marker
    return _table("Frequency (Hz),Amplitude (g)", [f, a]).encode()


_NEGATIVE_ROWS = np.array([5, 400, 777])


def _negative_keep() -> np.ndarray:
    keep = np.ones(clean_spectrum()[0].size, dtype=bool)
    keep[_NEGATIVE_ROWS] = False
    return keep


def _negative() -> bytes:
    f, a = _fa()
    for row in _NEGATIVE_ROWS:
        a[row] = "-" + a[row]
    return _table("Frequency (Hz),Amplitude (g)", [f, a]).encode()


def _binary() -> bytes:
    return np.random.default_rng(5).integers(0, 256, 4096, dtype=np.uint8).tobytes()


def _two_unnamed() -> bytes:
    f, a = _fa()
    other = _num(clean_spectrum()[1][::-1])
    return _table(None, [f, a, other]).encode()


def _two_named_channels() -> bytes:
    f, a = _fa()
    other = _num(clean_spectrum()[1][::-1])
    return _table("Frequency (Hz),Ch1 (g),Ch2 (g)", [f, a, other]).encode()


def _comments() -> bytes:
    f, a = _fa()
    rows = [
        f"{x},{y}" + (" # peak" if i == 35 else "")
        for i, (x, y) in enumerate(zip(f, a, strict=True))
    ]
    return ("# spectrum export\nf (Hz),amp (g)\n" + "\n".join(rows) + "\n# end\n").encode()


def _amplitude_first() -> bytes:
    f, a = _fa()
    return _table("Amplitude (g);Frequency (Hz)", [a, f], ";").encode()


def _utf16_no_bom() -> bytes:
    f, a = _fa()
    return _table("Frequency (Hz)\tAmplitude (g)", [f, a], "\t", "\r\n").encode("utf-16-le")


def _cr_only() -> bytes:
    f, a = _fa()
    return _table("Frequency (Hz),Amplitude (g)", [f, a], eol="\r").encode("mac-roman")


def _orders() -> bytes:
    f, a = _fa()
    return _table("Order,Amplitude (g)", [f, a]).encode()


FORMS: tuple[Form, ...] = (
    Form("clean", _clean, amplitude_unit="g"),
    Form("semicolon_decimal_comma_cp1252", _semicolon_comma, amplitude_unit="g"),
    Form("tab", _tab, amplitude_unit="g"),
    Form("space_aligned", _spaces, amplitude_unit="g"),
    Form("utf8_bom", _encoded(codecs.BOM_UTF8, "utf-8"), amplitude_unit="g"),
    Form("utf16_le_bom", _encoded(codecs.BOM_UTF16_LE, "utf-16-le"), amplitude_unit="g"),
    Form("utf16_be_bom", _encoded(codecs.BOM_UTF16_BE, "utf-16-be"), amplitude_unit="g"),
    Form("crlf", _crlf, amplitude_unit="g"),
    Form("metadata_block", _metadata, amplitude_unit="g", sample_rate_hz=12_800.0),
    Form("analyser_block", _analyser_block, amplitude_unit="g", sample_rate_hz=12_800.0),
    Form("quoted", _quoted, amplitude_unit="g"),
    Form("quoted_decimal_comma", _quoted_decimal_comma, amplitude_unit="g"),
    Form("thousands_comma", _thousands, amplitude_unit="g"),
    Form("thousands_point", _thousands_european, amplitude_unit="g"),
    Form("comments", _comments, amplitude_unit="g"),
    Form("khz", _khz, amplitude_unit="g", freq_unit="kHz"),
    Form("cpm", _cpm, amplitude_unit="mm/s", freq_unit="cpm"),
    Form("phase_column", _phase, amplitude_unit="g"),
    Form("real_imag", _real_imag, amplitude_unit="g"),
    Form("db_header", _db, db=True, amplitude_unit="dB re 1 g"),
    Form("non_finite_markers", _non_finite, keep=_marked_keep, amplitude_unit="g"),
    Form("few_negative", _negative, keep=_negative_keep, amplitude_unit="g"),
    Form(
        "named_channel_chosen",
        _two_named_channels,
        amplitude_unit="g",
        kwargs={"amplitude_column": "Ch1"},
    ),
    Form("amplitude_first", _amplitude_first, amplitude_unit="g"),
    Form("utf16_le_no_bom_crlf", _utf16_no_bom, amplitude_unit="g"),
    Form("cr_only_line_ends", _cr_only, amplitude_unit="g"),
    Form("binary_named_csv", _binary, error="binary_content"),
    Form("orders_axis", _orders, error="unsupported_unit"),
    Form("two_unnamed_amplitudes", _two_unnamed, error="ambiguous_columns"),
    Form("two_named_channels", _two_named_channels, error="ambiguous_columns"),
)

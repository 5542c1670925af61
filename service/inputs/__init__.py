"""Reading uploaded spectra and time records into plain arrays for the core.

Not part of the numeric core: these modules may use pandas. Every failure is a
:class:`service.core.errors.InputError` (a ``ValueError``) with the request field, a
stable ``code`` and a ``remedy``, so the API can hand it to a person unchanged.

Modules
-------
text
    Delimited text tables: encoding, header block (metadata, sample rate), dialect
    (separator, decimal and thousands marks), non-finite markers, bad lines.
spectrum
    :func:`parse_spectrum_text`: columns chosen by name, frequency and amplitude units,
    linear or dB and how that was decided.
wav, npy, records
    :func:`parse_time_record`: WAV (PCM 8/16/24/32-bit, float 32/64-bit, EXTENSIBLE),
    ``.npy`` (1-D or 2-D) and text with one column per channel; the file's own rate is
    returned beside the one used.
"""

from __future__ import annotations

from ._common import DEFAULT_MAX_SAMPLES, DEFAULT_MAX_SPECTRUM_LINES, TimeRecord
from .records import guess_text_kind, parse_time_record
from .spectrum import ParsedSpectrum, parse_spectrum_text
from .text import decode_text, metadata_sample_rate, sniff_table

__all__ = [
    "DEFAULT_MAX_SAMPLES",
    "DEFAULT_MAX_SPECTRUM_LINES",
    "ParsedSpectrum",
    "TimeRecord",
    "decode_text",
    "guess_text_kind",
    "metadata_sample_rate",
    "parse_spectrum_text",
    "parse_time_record",
    "sniff_table",
]

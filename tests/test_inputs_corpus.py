"""Issue 12's bar at the reader: every export form of one simulated spectrum reads to the
simulated arrays, or fails with the expected InputError (field, code, remedy).

Reference: the arrays come from the project's simulator (tests/core/simulate.py), not
from the reader; the frequency units are converted with 1 kHz = 1000 Hz and
1 cpm = 1/60 Hz (SI and the cycles-per-minute definition), the dB form with 20·log10
of the amplitude.
"""

from __future__ import annotations

import numpy as np
import pytest

from service.core.errors import InputError
from service.inputs import guess_text_kind, parse_spectrum_text, parse_time_record
from tests.inputs_corpus import FORMS, Form, clean_spectrum


@pytest.mark.parametrize("form", FORMS, ids=[f.name for f in FORMS])
def test_form_reads_like_the_clean_file(form: Form) -> None:
    data = form.make()
    if form.error is not None:
        with pytest.raises(InputError) as caught:
            parse_spectrum_text(data, **form.kwargs)  # type: ignore[arg-type]
        err = caught.value
        assert (err.code, err.field) == (form.error, "file")
        assert err.remedy and 400 <= err.status < 500
        return
    parsed = parse_spectrum_text(data, **form.kwargs)  # type: ignore[arg-type]
    freq, amp = clean_spectrum()
    keep = form.keep() if form.keep is not None else np.ones(freq.size, dtype=bool)
    np.testing.assert_allclose(parsed.freq_hz, freq[keep], rtol=1e-9, atol=1e-9)
    if form.db:
        assert (parsed.unit, parsed.scale_source) == ("db", "header")
        np.testing.assert_allclose(parsed.amplitude, 20 * np.log10(amp[keep]), rtol=1e-9)
    else:
        assert parsed.unit == "linear"
        np.testing.assert_allclose(parsed.amplitude, amp[keep], rtol=1e-9, atol=1e-15)
    assert parsed.freq_unit == form.freq_unit
    assert parsed.amplitude_unit == form.amplitude_unit
    assert parsed.sample_rate_hz == form.sample_rate_hz
    dropped = int(np.count_nonzero(~keep))
    assert parsed.n_dropped == dropped and parsed.n_lines == int(keep.sum())
    if dropped:
        assert any("left out" in note for note in parsed.notes)
    assert len(set(parsed.notes)) == len(parsed.notes)


def test_binary_named_csv_as_time_record() -> None:
    binary = next(f for f in FORMS if f.name == "binary_named_csv").make()
    with pytest.raises(InputError) as caught:
        parse_time_record(binary, "capture.csv", sample_rate_hz=12_800)
    assert (caught.value.code, caught.value.field) == ("binary_content", "file")
    assert "not text" in caught.value.message


def test_ambiguous_columns_names_them_and_the_option() -> None:
    data = next(f for f in FORMS if f.name == "two_named_channels").make()
    with pytest.raises(InputError) as caught:
        parse_spectrum_text(data)
    assert "'Ch1 (g)'" in caught.value.message and "'Ch2 (g)'" in caught.value.message
    assert "amplitude_column" in (caught.value.remedy or "")
    # A column number works as well as a name (0-based, as listed in the message).
    parsed = parse_spectrum_text(data, amplitude_column=2)
    np.testing.assert_allclose(parsed.amplitude, clean_spectrum()[1][::-1], rtol=1e-9)


def test_request_scale_wins_and_says_so() -> None:
    data = next(f for f in FORMS if f.name == "db_header").make()
    parsed = parse_spectrum_text(data, unit="db")
    assert parsed.scale_source == "request"
    parsed = parse_spectrum_text(next(f for f in FORMS if f.name == "clean").make())
    assert parsed.scale_source == "values"


@pytest.mark.parametrize("form", [f for f in FORMS if f.error is None], ids=lambda f: f.name)
def test_spectrum_forms_are_told_from_time_records(form: Form) -> None:
    assert guess_text_kind(form.make()) == "spectrum"


def test_time_records_are_told_from_spectra() -> None:
    # Reference: the layouts written here (one column; a time column and two channels).
    assert guess_text_kind(b"Sample rate: 12800 Hz\nacc\n0,5\n-0,25\n0,125\n") == "time_record"
    assert guess_text_kind(b"Time (s),x,y\n0,1,2\n0.1,2,3\n0.2,3,4\n") == "time_record"


_JUNK = (b",", b";", b"\t", b" ", b"\n", b"\r", b'"', b"#", b"nan", b"-", b"1e999", b"\x00",
         b"\xff", b"1,5", b"abc", b":", b"=", b"kHz", b"dB")  # fmt: skip


@pytest.mark.parametrize("form", FORMS, ids=[f.name for f in FORMS])
def test_damaged_files_fail_with_input_errors(form: Form) -> None:
    """Cut, spliced and truncated copies either read or raise InputError, nothing else.

    Found lone carriage returns crashing the csv module before it was written.
    """
    rng = np.random.default_rng(sum(form.name.encode()))
    base = form.make()[:3000]
    for _ in range(25):
        data = bytearray(base)
        for _ in range(int(rng.integers(1, 6))):
            op, pos = int(rng.integers(0, 3)), int(rng.integers(0, len(data) + 1))
            if op == 0:
                data[pos:pos] = _JUNK[int(rng.integers(len(_JUNK)))]
            elif op == 1:
                del data[pos : pos + int(rng.integers(1, 40))]
            else:
                del data[pos:]
        for read in (
            lambda d: parse_spectrum_text(d),
            lambda d: parse_spectrum_text(d, amplitude_column="zz"),
            lambda d: parse_time_record(d, "x.csv", sample_rate_hz=100.0),
        ):
            try:
                read(bytes(data))
            except InputError as err:
                assert err.field and err.code and 400 <= err.status < 500
        assert guess_text_kind(bytes(data)) in ("spectrum", "time_record")

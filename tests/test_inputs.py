"""Tests for service.inputs: spectrum text and time-record files, good and broken."""

from __future__ import annotations

import io
import struct
import wave

import numpy as np
import pytest

from service.core.errors import InputError
from service.inputs import parse_spectrum_text, parse_time_record

FS = 12_800
N = 1000


def _signal(n_channels: int = 1) -> np.ndarray:
    """Reference samples in [-0.9, 0.9]: a different tone per channel."""
    t = np.arange(N) / FS
    return np.stack([0.9 * np.sin(2 * np.pi * (500 + 250 * c) * t) for c in range(n_channels)], 1)


def _pcm_wav(x: np.ndarray, sampwidth: int) -> bytes:
    """Write integer PCM with the standard library wave module (the reference writer)."""
    full = 2 ** (8 * sampwidth - 1)
    ints = np.clip(np.round(x * full), -full, full - 1).astype(np.int64)
    if sampwidth == 1:
        raw = (ints + 128).astype(np.uint8).tobytes()
    else:
        little = ints.astype("<i8").view(np.uint8).reshape(ints.size, 8)[:, :sampwidth]
        raw = little.tobytes()
    buf = io.BytesIO()
    with wave.open(buf, "wb") as w:
        w.setnchannels(x.shape[1])
        w.setsampwidth(sampwidth)
        w.setframerate(FS)
        w.writeframes(raw)
    return buf.getvalue()


def _float_wav(x: np.ndarray, dtype: str = "<f4", extensible: bool = False) -> bytes:
    """Hand-built RIFF/WAVE with IEEE float samples (format 3 or EXTENSIBLE)."""
    n_ch = x.shape[1]
    width = np.dtype(dtype).itemsize
    data = x.astype(dtype).tobytes()
    block = n_ch * width
    if extensible:
        guid = struct.pack("<H", 3) + b"\x00\x00\x00\x00\x10\x00\x80\x00\x00\xaa\x00\x38\x9b\x71"
        fmt = struct.pack("<HHIIHH", 0xFFFE, n_ch, FS, FS * block, block, 8 * width)
        fmt += struct.pack("<HHI", 22, 8 * width, 0) + guid
    else:
        fmt = struct.pack("<HHIIHH", 3, n_ch, FS, FS * block, block, 8 * width)
    chunks = b"fmt " + struct.pack("<I", len(fmt)) + fmt
    chunks += b"LIST" + struct.pack("<I", 5) + b"abcde\x00"  # odd chunk: pad byte
    chunks += b"data" + struct.pack("<I", len(data)) + data
    return b"RIFF" + struct.pack("<I", 4 + len(chunks)) + b"WAVE" + chunks


class TestParseSpectrumText:
    def test_csv_with_header(self) -> None:
        text = "Frequency (Hz),Amplitude (g)\n0,0.01\n1.5,0.2\n3,0.05\n"
        p = parse_spectrum_text(text)
        np.testing.assert_array_equal(p.freq_hz, [0.0, 1.5, 3.0])
        np.testing.assert_array_equal(p.amplitude, [0.01, 0.2, 0.05])
        assert (p.unit, p.n_lines) == ("linear", 3)
        assert p.header == ("Frequency (Hz)", "Amplitude (g)")

    def test_formats(self) -> None:
        expected = ([10.0, 20.0, 30.0], [1.0, 3.0, 2.0])
        variants = [
            b"10,1\n20,3\n30,2",  # CSV without header, no final newline
            b"10\t1\n20\t3\n30\t2\n",  # TSV
            b"10   1\n 20 3\n30\t 2\n",  # whitespace
            b"10;1\r\n20;3\r\n30;2\r\n",  # semicolon, CRLF
            b"\xef\xbb\xbf# exported spectrum\n\n  # indented comment\nf,a\n10, 1 # note\n"
            b"20 ,3\n\n30,2\n# end\n",  # BOM, comments, blank lines, spaces
        ]
        for data in variants:
            p = parse_spectrum_text(data)
            np.testing.assert_array_equal(p.freq_hz, expected[0], err_msg=repr(data))
            np.testing.assert_array_equal(p.amplitude, expected[1], err_msg=repr(data))

    def test_db_header(self) -> None:
        for header in ("freq,dB", "Hz\tLevel (dBV)", "f amp_dBg", "Frequency Amplitude (dB)"):
            sep = "\t" if "\t" in header else ("," if "," in header else " ")
            text = header + "\n" + "\n".join(f"{f}{sep}{a}" for f, a in [(1, 3), (2, 4), (3, 1)])
            p = parse_spectrum_text(text)
            assert p.unit == "db", header
            assert "header" in p.unit_reason
        p = parse_spectrum_text("f,feedback\n1,3\n2,4\n3,1\n")
        assert p.unit == "linear"

    def test_db_values(self) -> None:
        p = parse_spectrum_text("1,-80\n2,-20\n3,-75\n")
        assert p.unit == "db" and "negative" in p.unit_reason

    def test_large(self) -> None:
        n = 200_000
        f = np.arange(n) * 0.125
        a = np.abs(np.sin(f)) + 1e-3
        text = "\n".join(f"{x:.3f},{y:.17g}" for x, y in zip(f, a, strict=True))
        p = parse_spectrum_text("# big\n" + text)
        # Reference: the arrays the text was written from
        np.testing.assert_array_equal(p.freq_hz, f)
        np.testing.assert_array_equal(p.amplitude, a)

    @pytest.mark.parametrize(
        ("text", "message"),
        [
            ("", "no data lines"),
            ("# only a comment\n\n", "no data lines"),
            ("1\n2\n3\n", "line 1 has 1 column; expected 2"),
            ("f,a\n1,2\n2,3\n3,4,5\n", "line 4 has 3 columns; expected 2"),
            ("# c\n1,2\n\n2\n3,4\n", "line 4 has 1 column; expected 2"),
            ("1,2\n2,3\n3,4\n4,abc\n", "line 4, column 2: 'abc' is not a number"),
            ("1 2\n2 inf\n3 4\n", "the spectrum has 2 data lines; at least 3"),
            ("f,a\n1,2\n2,3\n2,4\n", "line 4: frequency 2 Hz repeats line 3"),
            ("1,2\n# c\n3,3\n2,4\n", "line 4: frequency 2 Hz is lower than 3 Hz on line 3"),
            ("-1,2\n2,3\n3,4\n", "line 1: frequency -1 Hz is negative"),
            ("1,2\n2,2\n3,2\n", "the amplitude is constant"),
            ("1,2\n2,3\n", "2 data lines; at least 3"),
        ],
    )
    def test_errors(self, text: str, message: str) -> None:
        with pytest.raises(ValueError, match=message.replace("(", r"\(").replace(")", r"\)")):
            parse_spectrum_text(text)

    def test_non_finite_and_decimal_comma(self) -> None:
        # Issue 12: non-finite cells are dropped and counted, not a failure of the file;
        # "2,5" beside ";" is a decimal comma, not an error.
        p = parse_spectrum_text("1,2\n2,3\n3,4\n4,5\n5,nan\n")
        np.testing.assert_array_equal(p.freq_hz, [1, 2, 3, 4])
        assert p.dropped == {"non_finite": 1} and any("line 5" in n for n in p.notes)
        p = parse_spectrum_text("1;2,5\n2;3\n3;4\n")
        np.testing.assert_array_equal(p.amplitude, [2.5, 3, 4])

    def test_limit(self) -> None:
        text = "\n".join(f"{i},{i % 7}" for i in range(101))
        assert parse_spectrum_text(text, max_lines=101).n_lines == 101
        with pytest.raises(ValueError, match="the spectrum has 101 data lines; the limit is 100"):
            parse_spectrum_text(text, max_lines=100)
        with pytest.raises(ValueError, match="the text has 101 samples; the limit is 1"):
            parse_time_record(text.encode(), "s.csv", sample_rate_hz=1.0, max_samples=1)
        with pytest.raises(ValueError, match="max_lines=0 must be a whole number >= 1"):
            parse_spectrum_text(text, max_lines=0)


class TestParseTimeRecord:
    @pytest.mark.parametrize(("width", "tol"), [(1, 1 / 128), (2, 1 / 32768), (3, 2.0**-23)])
    def test_wav_pcm(self, width: int, tol: float) -> None:
        x = _signal(1)
        rec = parse_time_record(_pcm_wav(x, width), "run.wav")
        # Reference: the samples written with the standard library wave module
        np.testing.assert_allclose(rec.samples, x[:, 0], atol=tol)
        assert rec.samples.dtype == np.float32
        assert (rec.sample_rate_hz, rec.n_channels, rec.channel) == (FS, 1, 0)
        assert f"PCM {8 * width}-bit" in rec.format_description

    def test_wav_pcm32_multichannel(self) -> None:
        x = _signal(3)
        rec = parse_time_record(_pcm_wav(x, 4), "run.WAV", channel=2)
        np.testing.assert_allclose(rec.samples, x[:, 2], atol=2.0**-30)
        assert rec.samples.dtype == np.float64
        assert rec.n_channels == 3 and rec.channel == 2

    def test_wav_float(self) -> None:
        x = _signal(2)
        rec = parse_time_record(_float_wav(x), "f.wav", channel=1)
        assert rec.samples.dtype == np.float32
        np.testing.assert_array_equal(rec.samples, x[:, 1].astype(np.float32))
        rec = parse_time_record(_float_wav(x, "<f8", extensible=True), "upload.bin")
        assert rec.samples.dtype == np.float64
        np.testing.assert_array_equal(rec.samples, x[:, 0])
        assert "extensible float 64-bit" in rec.format_description

    def test_wav_rate_conflict(self) -> None:
        # Issue 12: a request rate that disagrees with the header is an error naming both
        # values; the request wins only when asked to.
        wav = _float_wav(_signal(1))
        with pytest.raises(
            InputError, match="25600 Hz disagrees with the file's own rate of 12800"
        ) as e:
            parse_time_record(wav, "f.wav", sample_rate_hz=25_600)
        assert (e.value.code, e.value.field, e.value.limit) == (
            "rate_conflict",
            "sample_rate_hz",
            FS,
        )
        assert "Leave sample_rate_hz out" in (e.value.remedy or "")
        rec = parse_time_record(wav, "f.wav", sample_rate_hz=25_600, rate_conflict="request")
        assert (rec.sample_rate_hz, rec.file_rate_hz, rec.rate_source) == (25_600, FS, "request")
        assert "header says 12800 Hz" in rec.format_description
        rec = parse_time_record(wav, "f.wav", sample_rate_hz=FS)
        assert (rec.sample_rate_hz, rec.rate_source) == (FS, "request")

    def test_wav_errors(self) -> None:
        good = _pcm_wav(_signal(2), 2)
        with pytest.raises(
            ValueError, match=r"WAV data chunk says 4000 bytes but only 3000 follow"
        ):
            parse_time_record(good[:-1000], "cut.wav")
        with pytest.raises(ValueError, match="WAV header is truncated"):
            parse_time_record(good[:30], "cut.wav")
        with pytest.raises(ValueError, match="WAV header is truncated"):
            parse_time_record(good[:8], "cut.wav")
        with pytest.raises(ValueError, match="channel=2 but the file has 2 channels"):
            parse_time_record(good, "two.wav", channel=2)
        with pytest.raises(ValueError, match="has 1000 samples per channel; the limit is 999"):
            parse_time_record(good, "two.wav", max_samples=999)
        silent = _pcm_wav(np.zeros((N, 1)), 2)
        with pytest.raises(ValueError, match="channel 0 is constant"):
            parse_time_record(silent, "quiet.wav")
        alaw = bytearray(good)
        alaw[20:22] = struct.pack("<H", 6)
        with pytest.raises(ValueError, match="format tag 6 with 16 bits"):
            parse_time_record(bytes(alaw), "alaw.wav")
        with pytest.raises(ValueError, match="not a RIFF/WAVE file"):
            parse_time_record(b"OggS" + bytes(100), "x.wav")
        nan_wav = _float_wav(np.array([[0.1], [np.nan], [0.3]]))
        with pytest.raises(ValueError, match="sample 1 of channel 0 is nan"):
            parse_time_record(nan_wav, "nan.wav")

    def test_npy(self) -> None:
        x = _signal(3).astype(np.float32)
        buf = io.BytesIO()
        np.save(buf, x[:, 0])
        rec = parse_time_record(buf.getvalue(), "a.npy", sample_rate_hz=FS)
        assert rec.samples.dtype == np.float32
        np.testing.assert_array_equal(rec.samples, x[:, 0])
        for arr in (x, x.T.astype(np.float64)):  # (samples, channels) or (channels, samples)
            buf = io.BytesIO()
            np.save(buf, arr)
            rec = parse_time_record(buf.getvalue(), "b.npy", sample_rate_hz=FS, channel=1)
            np.testing.assert_array_equal(rec.samples, x[:, 1])
            assert rec.n_channels == 3

    def test_npy_errors(self) -> None:
        buf = io.BytesIO()
        np.save(buf, np.zeros((4, 5, 6)))
        with pytest.raises(ValueError, match=r"shape \(4, 5, 6\); 1-D or 2-D"):
            parse_time_record(buf.getvalue(), "c.npy", sample_rate_hz=FS)
        with pytest.raises(ValueError, match=r"sample_rate_hz is required for a \.npy array"):
            parse_time_record(buf.getvalue(), "c.npy")
        buf = io.BytesIO()
        np.save(buf, np.ones(10, dtype=complex))
        with pytest.raises(ValueError, match="dtype complex128"):
            parse_time_record(buf.getvalue(), "c.npy", sample_rate_hz=FS)
        buf = io.BytesIO()
        np.save(buf, np.arange(5000.0))
        with pytest.raises(ValueError, match="5000 samples per channel; the limit is 4999"):
            parse_time_record(buf.getvalue(), "c.npy", sample_rate_hz=FS, max_samples=4999)
        with pytest.raises(ValueError, match=r"\.npy data cannot be read"):
            parse_time_record(buf.getvalue()[:-100], "c.npy", sample_rate_hz=FS)

    def test_text(self) -> None:
        x = _signal(2)
        text = "# bench run\nacc_x,acc_y\n" + "\n".join(f"{float(a)!r},{float(b)!r}" for a, b in x)
        rec = parse_time_record(text.encode(), "run.csv", sample_rate_hz=FS, channel=1)
        np.testing.assert_array_equal(rec.samples, x[:, 1])
        assert rec.n_channels == 2 and "'acc_y'" in rec.format_description
        single = "\n".join(repr(float(v)) for v in x[:, 0]).encode()
        rec = parse_time_record(single, "s.txt", sample_rate_hz=FS)
        np.testing.assert_array_equal(rec.samples, x[:, 0])

    def test_text_errors(self) -> None:
        with pytest.raises(ValueError, match="sample_rate_hz is required for text samples"):
            parse_time_record(b"1\n2\n", "s.csv")
        with pytest.raises(ValueError, match="line 3, column 1: 'x' is not a number"):
            parse_time_record(b"1\n2\nx\n", "s.csv", sample_rate_hz=FS)
        with pytest.raises(ValueError, match="line 2 has 2 columns; expected 1"):
            parse_time_record(b"1\n2 3\n", "s.csv", sample_rate_hz=FS)
        with pytest.raises(ValueError, match="sample_rate_hz=-1 must be a finite number > 0"):
            parse_time_record(b"1\n2\n", "s.csv", sample_rate_hz=-1)

    def test_unknown_type(self) -> None:
        with pytest.raises(ValueError, match=r"unknown type; accepted: WAV \(.wav\), NumPy"):
            parse_time_record(b"\x00\x01\x02", "capture.mat")


class TestFileRates:
    """The file's own rate, the request's, and what each channel carries (issue 12)."""

    def test_text_header_rate(self) -> None:
        x = _signal(2)
        body = "\n".join(f"{a!r};{b!r}".replace(".", ",") for a, b in x.tolist())
        text = f"Device: bench 3\nSample rate: {FS / 1000:g} kHz\nacc_x;acc_y\n{body}\n"
        rec = parse_time_record(text.encode(), "run.csv", channel=1)
        # Reference: the samples written (decimal comma), 1 kHz = 1000 Hz
        np.testing.assert_array_equal(rec.samples, x[:, 1])
        assert (rec.sample_rate_hz, rec.file_rate_hz, rec.rate_source) == (FS, FS, "file")
        assert rec.channel_names == ("acc_x", "acc_y") and rec.metadata["Device"] == "bench 3"
        with pytest.raises(InputError) as e:
            parse_time_record(text.encode(), "run.csv", sample_rate_hz=2 * FS)
        assert e.value.code == "rate_conflict" and "25600" in e.value.message
        assert "12800" in e.value.message

    def test_time_column(self) -> None:
        x = _signal(2)
        t = np.arange(N) / FS
        rows = "\n".join(f"{a:.9g},{b!r},{c!r}" for a, (b, c) in zip(t, x.tolist(), strict=True))
        rec = parse_time_record(f"Time (s),x,y\n{rows}\n".encode(), "t.csv")
        assert rec.n_channels == 2 and rec.channel_names == ("x", "y")
        np.testing.assert_array_equal(rec.samples, x[:, 0])
        # Reference: the rate the time column was written with (t = k / FS)
        assert rec.sample_rate_hz == pytest.approx(FS, rel=1e-6)
        ms = "\n".join(f"{1000 * a:.9g},{b!r}" for a, b in zip(t, x[:, 0].tolist(), strict=True))
        rec = parse_time_record(f"t [ms],x\n{ms}\n".encode(), "t.csv", sample_rate_hz=FS)
        assert rec.rate_source == "request" and rec.file_rate_hz == pytest.approx(FS, rel=1e-6)

    def test_channel_levels(self) -> None:
        x = _signal(2)
        x[:, 0] = np.random.default_rng(1).normal(0, 1e-4, N)  # converter noise only
        rec = parse_time_record(_pcm_wav(x, 3), "two.wav")
        # Reference: RMS of a sine of amplitude A is A/sqrt(2) (any signals textbook);
        # 1000 samples are not a whole number of cycles, so allow 1 %.
        assert rec.channel_rms[1] == pytest.approx(0.9 / np.sqrt(2), rel=0.01)
        assert rec.channel_rms[0] == pytest.approx(1e-4, rel=0.1)
        assert rec.channel_peak[1] == pytest.approx(0.9, rel=0.01)
        assert rec.full_scale == 1.0 and rec.file_rate_hz == FS
        assert parse_time_record(_float_wav(x), "f.wav").full_scale is None

    def test_npy_needs_a_rate(self) -> None:
        buf = io.BytesIO()
        np.save(buf, _signal(1)[:, 0])
        with pytest.raises(InputError) as e:
            parse_time_record(buf.getvalue(), "a.npy")
        assert (e.value.code, e.value.field) == ("missing_sample_rate", "sample_rate_hz")
        assert e.value.remedy

    @pytest.mark.parametrize(
        ("line", "rate"),
        [
            # Reference: unit definitions (1 kHz = 1000 Hz, 1 µs = 1e-6 s, rate = 1/step)
            ("Sample rate: 12800 Hz", 12_800.0),
            ("Fs (kHz): 12.8", 12_800.0),
            ("Sampling frequency;25,6;kHz", 25_600.0),
            ("samplerate=48000", 48_000.0),
            ("dt = 78.125 us", 12_800.0),
            ("Sample interval: 0.5 ms", 2_000.0),
        ],
    )
    def test_header_rate_spellings(self, line: str, rate: float) -> None:
        text = f"{line}\nf,a\n1,2\n2,3\n3,1\n"
        assert parse_spectrum_text(text).sample_rate_hz == pytest.approx(rate)

    def test_text_record_gap(self) -> None:
        with pytest.raises(InputError) as e:
            parse_time_record(b"1\n2\nnan\n4\n", "s.csv", sample_rate_hz=FS)
        assert e.value.code == "non_finite_sample" and "line 3" in e.value.message


class TestScaleFromValues:
    def test_few_negatives_in_a_linear_column(self) -> None:
        # A linear spectrum: tall peaks over a low floor; two cells written negative.
        amp = np.full(200, 1e-3)
        amp[[50, 120]] = 0.5
        amp[[10, 90]] = -1e-3
        text = "\n".join(f"{i},{a!r}" for i, a in enumerate(amp.tolist()))
        p = parse_spectrum_text(text)
        assert (p.unit, p.scale_source, p.dropped) == ("linear", "values", {"negative": 2})
        assert p.n_lines == 198 and any("negative amplitude" in n for n in p.notes)

    def test_mostly_positive_db_is_not_taken_for_linear(self) -> None:
        # dB re 1 µm/s: a floor near 20 dB with one dip below 0; no header says dB.
        level = np.full(200, 20.0) + np.sin(np.arange(200))
        level[77] = -3.0
        text = "\n".join(f"{i},{v!r}" for i, v in enumerate(level.tolist()))
        with pytest.raises(InputError) as e:
            parse_spectrum_text(text)
        assert e.value.code == "ambiguous_scale" and "unit='db'" in (e.value.remedy or "")
        assert parse_spectrum_text(text, unit="db").scale_source == "request"

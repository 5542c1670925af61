"""The issue's bar through the real app: one simulated acquisition, every export form.

The acquisition is the project's simulator's (``tests/core/simulate.py``: tones sampled
with numpy and scipy, noise added): demo scenario (invented) of a 440 Hz shaft line, a
1.8 kHz mesh and the 10 kHz inverter carrier at 12.8 kS/s with no anti-alias filter, so
the carrier folds to 12.8 − 10 = 2.8 kHz. Spectrum forms come from
``tests/inputs_corpus.py``; the time-record forms below write the simulated samples as
recorders do. Each form is uploaded with the same tones and chain and must give the same
aliased / not-aliased peaks as the clean form, or the expected 4xx naming the field and
saying what to do. Never a 500.
"""

from __future__ import annotations

import io
import json
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from functools import cache
from typing import Any

import numpy as np
import pytest
import scipy.io.wavfile
from fastapi.testclient import TestClient

from service.app import create_app
from service.config import Settings
from tests.core.simulate import SimChain, simulate_capture
from tests.inputs_corpus import FORMS, TONES, clean_spectrum
from tests.inputs_corpus import FS as CORPUS_FS

FS = 12_800.0
assert CORPUS_FS == FS
REQUEST: dict[str, Any] = {
    "sample_rate_hz": FS,
    "tones": [
        {"label": "shaft line", "freq_hz": TONES[0][0]},
        {"label": "gear mesh", "freq_hz": TONES[1][0]},
        {"label": "inverter carrier", "freq_hz": TONES[2][0]},
    ],
}
# Reference: fold(f, fs) = |f − fs·round(f/fs)| by hand: 10 kHz at 12.8 kS/s → 2.8 kHz.
ALIAS_HZ = abs(TONES[2][0] - FS * round(TONES[2][0] / FS))
assert ALIAS_HZ == 2_800.0


def is_aliased(peak: dict[str, Any]) -> bool:
    """The one alias-or-not rule of these tests: the answer's ``aliased`` when it has one,
    else alias verdicts and harmonic-family members above the first Nyquist zone."""
    if "aliased" in peak:
        return bool(peak["aliased"])
    zone = peak.get("zone") or 1
    return peak["verdict"] == "alias" or (peak["verdict"] == "family" and zone > 1)


def alias_set(answer: dict[str, Any], min_snr_db: float = 0.0) -> set[tuple[float, bool]]:
    return {(p["freq_hz"], is_aliased(p)) for p in answer["peaks"] if p["snr_db"] >= min_snr_db}


def assert_same_alias_set(
    got: dict[str, Any], clean: dict[str, Any], tol_hz: float, min_snr_db: float = 0.0
) -> None:
    """Every peak of each answer is matched, within ``tol_hz``, by one of the other with
    the same alias class."""
    a, b = alias_set(got, min_snr_db), alias_set(clean, min_snr_db)
    for one, other, name in ((a, b, "form"), (b, a, "clean")):
        for f, aliased in one:
            match = [x for x in other if abs(x[0] - f) <= tol_hz]
            assert match, f"{name} peak at {f:.2f} Hz has no counterpart within {tol_hz} Hz"
            assert any(m[1] == aliased for m in match), (
                f"{name} peak at {f:.2f} Hz is aliased={aliased}, the other form disagrees"
            )


def post(client: TestClient, name: str, data: bytes, request: dict[str, Any] | None = None) -> Any:
    return client.post(
        "/api/v1/diagnose",
        files={"file": (name, data)},
        data={"request": json.dumps(request if request is not None else REQUEST)},
    )


def assert_problem(r: Any, status: int, field: str, words: tuple[str, ...]) -> dict[str, Any]:
    assert r.status_code == status, r.text
    assert r.headers["content-type"] == "application/problem+json"
    p = r.json()
    err = p["errors"][0]
    assert err["field"] == field, p
    assert err.get("remedy"), f"no remedy in {p}"
    assert err["remedy"] in p["detail"]
    for w in words:
        assert w in p["detail"], (w, p["detail"])
    return p


# ---------------------------------------------------------------------- spectrum files


@pytest.fixture(scope="module")
def client(tmp_path_factory: pytest.TempPathFactory) -> Iterator[TestClient]:
    """One app for the module: every form goes through the same real app."""
    settings = Settings(data_dir=tmp_path_factory.mktemp("forms"), max_body_bytes=2_000_000)
    with TestClient(create_app(settings), raise_server_exceptions=True) as c:
        yield c


@pytest.fixture(scope="module")
def clean_spectrum_answer(client: TestClient) -> dict[str, Any]:
    r = post(client, "spectrum.csv", next(f for f in FORMS if f.name == "clean").make())
    assert r.status_code == 200, r.text
    return dict(r.json())


class TestSpectrumForms:
    def test_clean_is_right(self, client: TestClient) -> None:
        ans = post(client, "spectrum.csv", next(f for f in FORMS if f.name == "clean").make())
        assert ans.status_code == 200, ans.text
        body = ans.json()
        aliased = {round(f) for f, a in alias_set(body) if a}
        real = {round(f) for f, a in alias_set(body) if not a}
        # Reference: the simulated tones and the hand fold above.
        assert aliased == {ALIAS_HZ}
        assert {TONES[0][0], TONES[1][0]} <= real
        assert body["summary"]["scale"] == "linear"
        assert body["summary"]["amplitude_unit"] == "g"

    @pytest.mark.parametrize("form", [f for f in FORMS if f.error is None], ids=lambda f: f.name)
    def test_same_answer_as_clean(
        self, client: TestClient, form: Any, clean_spectrum_answer: dict[str, Any]
    ) -> None:
        req = {**REQUEST, "upload": dict(form.kwargs)} if form.kwargs else REQUEST
        r = post(client, "spectrum.csv", form.make(), req)
        assert r.status_code == 200, r.text
        body = r.json()
        clean = clean_spectrum_answer
        assert_same_alias_set(body, clean, tol_hz=clean["summary"]["bin_width_hz"])
        s = body["summary"]
        # Reference: what the form was written with (tests/inputs_corpus.py).
        assert s["scale"] == ("db" if form.db else "linear")
        assert s["amplitude_unit"] == form.amplitude_unit
        assert s["frequency_unit"] == form.freq_unit
        assert s["scale_reason"]
        assert len(s["input_notes"]) == len(set(s["input_notes"]))
        if form.keep is not None:
            assert sum(s["dropped_rows"].values()) == int(np.count_nonzero(~form.keep()))

    @pytest.mark.parametrize("form", [f for f in FORMS if f.error], ids=lambda f: f.name)
    def test_refused_with_remedy(self, client: TestClient, form: Any) -> None:
        r = post(client, "spectrum.csv", form.make())
        assert 400 <= r.status_code < 500, r.text
        p = assert_problem(r, r.status_code, "file", ())
        assert p["errors"][0]["code"] == form.error

    def test_ambiguous_columns_name_the_option(self, client: TestClient) -> None:
        form = next(f for f in FORMS if f.name == "two_named_channels")
        r = post(client, "spectrum.csv", form.make())
        assert_problem(r, 422, "file", ("amplitude_column", "Ch1 (g)", "Ch2 (g)"))

    def test_unknown_amplitude_column(self, client: TestClient) -> None:
        form = next(f for f in FORMS if f.name == "two_named_channels")
        r = post(
            client, "spectrum.csv", form.make(), {**REQUEST, "upload": {"amplitude_column": "Ch9"}}
        )
        p = assert_problem(r, 422, "upload.amplitude_column", ("Ch9",))
        assert p["errors"][0]["code"] == "unknown_column"

    def test_rate_from_metadata_when_request_has_none(
        self, client: TestClient, clean_spectrum_answer: dict[str, Any]
    ) -> None:
        form = next(f for f in FORMS if f.name == "metadata_block")
        req = {k: v for k, v in REQUEST.items() if k != "sample_rate_hz"}
        r = post(client, "spectrum.csv", form.make(), req)
        assert r.status_code == 200, r.text
        body = r.json()
        assert body["final_rate_hz"] == FS
        assert any("12800 Hz" in n and "header" in n for n in body["summary"]["input_notes"])
        assert_same_alias_set(body, clean_spectrum_answer, body["summary"]["bin_width_hz"])
        assert body["summary"]["metadata"]

    def test_size_keeps_its_status(self, client: TestClient) -> None:
        # The reader's 413 (and its code) reaches the problem, not a flattened 422.
        state = client.app.state  # type: ignore[attr-defined]
        before = state.settings
        state.settings = before.model_copy(update={"max_spectrum_lines": 500})
        try:
            r = post(client, "spectrum.csv", next(f for f in FORMS if f.name == "clean").make())
        finally:
            state.settings = before
        assert r.status_code == 413, r.text
        assert r.json()["errors"][0]["code"] == "above_limit"
        assert r.json()["errors"][0]["field"] == "file"

    def test_metadata_rate_conflict(self, client: TestClient) -> None:
        form = next(f for f in FORMS if f.name == "metadata_block")
        r = post(client, "spectrum.csv", form.make(), {**REQUEST, "sample_rate_hz": 25_600})
        p = assert_problem(r, 422, "sample_rate_hz", ("25600", "12800"))
        assert p["errors"][0]["code"] == "rate_conflict"


class TestJsonSpectrumScale:
    """A JSON spectrum follows the file reader's one scale rule."""

    def _body(self, amplitude: list[float], **extra: Any) -> dict[str, Any]:
        freq = clean_spectrum()[0].tolist()
        return {**REQUEST, "spectrum": {"freq_hz": freq, "amplitude": amplitude, **extra}}

    def test_handful_of_negative_cells_is_bad_data(
        self, client: TestClient, clean_spectrum_answer: dict[str, Any]
    ) -> None:
        amp = clean_spectrum()[1].copy()
        amp[[5, 400, 777]] *= -1
        r = client.post("/api/v1/diagnose", json=self._body(amp.tolist(), amplitude_unit="g"))
        assert r.status_code == 200, r.text
        body = r.json()
        assert body["summary"]["scale"] == "linear"
        assert body["summary"]["dropped_rows"] == {"negative": 3}
        assert body["summary"]["amplitude_unit"] == "g"
        assert_same_alias_set(body, clean_spectrum_answer, body["summary"]["bin_width_hz"])

    def test_many_negative_cells_ask_for_the_unit(self, client: TestClient) -> None:
        amp = clean_spectrum()[1].copy()
        amp[::10] *= -1  # a tenth: neither a handful nor a dB scale
        r = client.post("/api/v1/diagnose", json=self._body(amp.tolist()))
        p = assert_problem(r, 422, "spectrum.amplitude", ("negative",))
        assert p["errors"][0]["code"] == "ambiguous_scale"


# ------------------------------------------------------------------------ time records


@cache
def capture() -> np.ndarray:
    """One second of the simulated acquisition at 12.8 kS/s (no anti-alias filter)."""
    cap = simulate_capture(TONES, SimChain(rate_hz=FS), 1.0, noise_rms=1e-3, seed=21)
    return cap.samples


def _wav(x: np.ndarray, rate: float = FS) -> bytes:
    buf = io.BytesIO()
    scipy.io.wavfile.write(buf, int(rate), x)
    return buf.getvalue()


def _npy(x: np.ndarray) -> bytes:
    buf = io.BytesIO()
    np.save(buf, x)
    return buf.getvalue()


def _column(x: np.ndarray, header: str | None = None) -> bytes:
    lines = ([header] if header else []) + [f"{v:.9g}" for v in x]
    return ("\n".join(lines) + "\n").encode()


def _time_column(x: np.ndarray) -> bytes:
    t = np.arange(x.size) / FS
    rows = [f"{a:.9f},{v:.9g}" for a, v in zip(t, x, strict=True)]
    return ("Time (s),Acceleration (g)\n" + "\n".join(rows) + "\n").encode()


def _decimal_comma_column(x: np.ndarray) -> bytes:
    rows = [f"{v:.9g}".replace(".", ",") for v in x]
    return ("Sample rate: 12800 Hz\nAcceleration (g)\n" + "\n".join(rows) + "\n").encode()


def _pcm(x: np.ndarray, dtype: type) -> bytes:
    """Integer PCM at half full scale (the converter's range is not reached)."""
    full = np.iinfo(dtype).max
    return _wav(np.round(x / (2 * np.max(np.abs(x))) * full).astype(dtype))


def _two_channel_text_ms(x: np.ndarray) -> bytes:
    other = np.random.default_rng(4).normal(0.0, 1e-3, x.size)
    rows = [
        f"{1e3 * i / FS:.6f};{o:.9g};{v:.9g}" for i, (o, v) in enumerate(zip(other, x, strict=True))
    ]
    return ("t [ms];Ch A (g);Ch B (g)\n" + "\n".join(rows) + "\n").encode()


@dataclass(frozen=True)
class TimeForm:
    name: str
    filename: str
    make: Callable[[], bytes]
    request: dict[str, Any] = field(default_factory=lambda: dict(REQUEST))


def _without_rate(extra: dict[str, Any] | None = None) -> dict[str, Any]:
    out = {k: v for k, v in REQUEST.items() if k != "sample_rate_hz"}
    return {**out, **(extra or {})}


TIME_FORMS = (
    TimeForm("wav_float32", "record.wav", lambda: _wav(capture().astype(np.float32))),
    TimeForm(
        "wav_rate_from_header",
        "record.wav",
        lambda: _wav(capture().astype(np.float32)),
        _without_rate(),
    ),
    TimeForm("npy_top_level_rate", "record.npy", lambda: _npy(capture())),
    TimeForm(
        "npy_nested_rate",
        "record.npy",
        lambda: _npy(capture()),
        _without_rate({"upload": {"sample_rate_hz": FS}}),
    ),
    TimeForm("text_top_level_rate", "record.csv", lambda: _column(capture())),
    TimeForm("wav_pcm16_half_scale", "record.wav", lambda: _pcm(capture(), np.int16)),
    TimeForm("wav_pcm32_half_scale", "record.wav", lambda: _pcm(capture(), np.int32)),
    TimeForm(
        "npy_2d_second_channel",
        "record.npy",
        lambda: _npy(np.stack([np.zeros_like(capture()), capture()], axis=1)),
        {**REQUEST, "upload": {"channel": 1}},
    ),
    TimeForm(
        "text_two_channels_time_in_ms",
        "record.csv",
        lambda: _two_channel_text_ms(capture()),
        _without_rate({"upload": {"channel": 1}}),
    ),
    TimeForm("text_time_column", "record.csv", lambda: _time_column(capture()), _without_rate()),
    TimeForm(
        "text_header_rate_decimal_comma",
        "record.txt",
        lambda: _decimal_comma_column(capture()),
        _without_rate(),
    ),
)


@pytest.fixture(scope="module")
def clean_time_answer(client: TestClient) -> dict[str, Any]:
    """The clean time form: the simulated samples as float64 .npy, rate in the request."""
    r = post(client, "record.npy", _npy(capture()))
    assert r.status_code == 200, r.text
    return dict(r.json())


# Peaks of a time record are compared where they stand clear of the floor: formats that
# round the samples (float32, 9 digits) move the noise peaks a little, not the tones.
STRONG_DB = 20.0


class TestTimeRecordForms:
    def test_clean_is_right(self, clean_time_answer: dict[str, Any]) -> None:
        body = clean_time_answer
        strong = alias_set(body, STRONG_DB)
        # Reference: the simulated tones and the hand fold at the top of this module.
        assert {round(f) for f, a in strong if a} == {ALIAS_HZ}
        assert {TONES[0][0], TONES[1][0]} <= {round(f) for f, a in strong if not a}
        assert body["summary"]["clipping"]["verdict"] == "none"

    @pytest.mark.parametrize("form", TIME_FORMS, ids=lambda f: f.name)
    def test_same_answer_as_clean(
        self, client: TestClient, form: TimeForm, clean_time_answer: dict[str, Any]
    ) -> None:
        r = post(client, form.filename, form.make(), form.request)
        assert r.status_code == 200, r.text
        body = r.json()
        clean = clean_time_answer
        # A time column gives the rate to its printed digits.
        assert body["final_rate_hz"] == pytest.approx(FS, rel=1e-6)
        assert_same_alias_set(body, clean, clean["summary"]["bin_width_hz"], STRONG_DB)
        if "sample_rate_hz" not in form.request and "upload" not in form.request:
            assert any("12800 Hz" in n for n in body["summary"]["input_notes"]), body["summary"]

    def test_wav_header_rate_conflict(self, client: TestClient) -> None:
        data = _wav(capture().astype(np.float32), rate=2 * FS)
        r = post(client, "record.wav", data)
        p = assert_problem(r, 422, "sample_rate_hz", ("12800", "25600"))
        assert p["errors"][0]["code"] == "rate_conflict"

    def test_nested_and_top_level_rates_disagree(self, client: TestClient) -> None:
        r = post(
            client, "record.npy", _npy(capture()), {**REQUEST, "upload": {"sample_rate_hz": 25_600}}
        )
        p = assert_problem(r, 422, "upload.sample_rate_hz", ("25600", "12800"))
        assert p["errors"][0]["code"] == "rate_conflict"

    def test_npy_without_any_rate(self, client: TestClient) -> None:
        r = post(client, "record.npy", _npy(capture()), _without_rate())
        p = assert_problem(r, 422, "sample_rate_hz", ())
        assert p["errors"][0]["code"] == "missing_sample_rate"

    def test_binary_named_csv_record(self, client: TestClient) -> None:
        r = post(client, "record.csv", _npy(capture())[:4096] + bytes(range(256)) * 8)
        assert 400 <= r.status_code < 500, r.text
        assert_problem(r, r.status_code, "file", ())


class TestClippedRecord:
    """10 % of the samples clipped at the converter's full scale (int16 WAV)."""

    @staticmethod
    def _clipped() -> tuple[bytes, float]:
        x = capture()
        level = float(np.quantile(np.abs(x), 0.90))  # 10 % of the samples beyond it
        clipped = np.clip(x, -level, level) / level
        return _wav(np.round(clipped * 32767).astype(np.int16)), level

    def test_flagged_and_products_not_called_aliases(self, client: TestClient) -> None:
        data, _ = self._clipped()
        r = post(client, "record.wav", data)
        assert r.status_code == 200, r.text
        body = r.json()
        clip = body["summary"]["clipping"]
        assert clip["verdict"] == "clipped"
        # Reference: np.quantile above puts 10 % of the samples on the two clip levels;
        # the fraction counts those in runs of 2 or more (single clipped crests not).
        assert 0.05 <= clip["fraction"] <= 0.10
        assert any("clipping" in n.lower() for n in body["notes"])
        # Reference: a symmetrically clipped sine adds odd harmonics (the Fourier series
        # of a clipped sine has only odd terms; computed here with numpy, see below),
        # so 3 × 440 Hz and 5 × 440 Hz appear, and products of the tones fold at fs.
        spec = np.abs(np.fft.rfft(np.clip(np.sin(2 * np.pi * np.arange(64) / 64), -0.5, 0.5)))
        assert spec[3] > 0.1 * spec[1] and spec[2] < 1e-9 * spec[1]
        f1, f2 = TONES[0][0], TONES[1][0]
        products = [3 * f1, 5 * f1, 2 * f1 + f2, 2 * f2 - f1, 2 * f1 - f2 + FS, 3 * f2]
        folded = [abs(p - FS * round(p / FS)) for p in products]
        tol = body["summary"]["bin_width_hz"]
        for f in folded:
            near = [p for p in body["peaks"] if abs(p["freq_hz"] - f) <= tol]
            for p in near:
                assert not is_aliased(p), (f, p["verdict"], p["explanation"])
                assert p["verdict"] not in ("mirror", "alias"), (f, p)
        marked = [p for p in body["peaks"] if p["verdict"] == "clipping"]
        assert marked and all("clipping" in p["explanation"] for p in marked)
        assert body["counts"].get("clipping") == len(marked)
        # The real tones keep their verdicts.
        real = {round(p["freq_hz"]) for p in body["peaks"] if p["verdict"] == "direct"}
        assert {TONES[0][0], TONES[1][0]} <= real

    def test_unclipped_int16_is_not_flagged(self, client: TestClient) -> None:
        x = capture() / (2 * np.max(np.abs(capture())))  # half full scale
        r = post(client, "record.wav", _wav(np.round(x * 32767).astype(np.int16)))
        assert r.status_code == 200, r.text
        assert r.json()["summary"]["clipping"]["verdict"] == "none"
        assert not [p for p in r.json()["peaks"] if p["verdict"] == "clipping"]


class TestChannels:
    def test_noise_only_channel_named(self, client: TestClient) -> None:
        rng = np.random.default_rng(8)
        noise = rng.normal(0.0, 1e-4, capture().size)
        stereo = np.stack([noise, capture()], axis=1).astype(np.float32)
        r = post(client, "record.wav", _wav(stereo))  # channel 0: the unconnected input
        assert r.status_code == 200, r.text
        body = r.json()
        chans = body["summary"]["channels"]
        assert [c["activity"] for c in chans] == ["noise", "signal"]
        assert chans[0]["analysed"] and not chans[1]["analysed"]
        note = next(n for n in body["notes"] if "only noise" in n)
        assert "channel 1" in note and "carries signal" in note
        if not body["peaks"]:
            assert any("No peak" in n for n in body["notes"])

    def test_signal_channel_same_as_clean(
        self, client: TestClient, clean_time_answer: dict[str, Any]
    ) -> None:
        rng = np.random.default_rng(8)
        noise = rng.normal(0.0, 1e-4, capture().size)
        stereo = np.stack([noise, capture()], axis=1).astype(np.float32)
        r = post(client, "record.wav", _wav(stereo), {**REQUEST, "upload": {"channel": 1}})
        assert r.status_code == 200, r.text
        body = r.json()
        clean = clean_time_answer
        assert_same_alias_set(body, clean, clean["summary"]["bin_width_hz"], STRONG_DB)
        assert not any("only noise" in n for n in body["notes"])

    def test_zero_peaks_are_explained(self, client: TestClient) -> None:
        rng = np.random.default_rng(9)
        r = post(
            client,
            "record.npy",
            _npy(rng.normal(0.0, 1.0, 12_800)),
            {**REQUEST, "threshold_db": 60},
        )
        assert r.status_code == 200, r.text
        body = r.json()
        assert body["peaks"] == []
        assert any("No peak stands 60 dB" in n for n in body["notes"])

"""The peak table and recording summary built from one diagnosis answer."""

from __future__ import annotations

from types import SimpleNamespace

from service.audit.rows import is_aliased, peak_rows, summary_row


def _peak(
    verdict: str,
    f: float,
    db: float,
    zone: int | None,
    in_band: bool = True,
    source: str | None = "inverter",
) -> dict:
    return {
        "freq_hz": f,
        "amplitude": 10 ** (db / 20),
        "amplitude_db": db,
        "verdict": verdict,
        "source": source,
        "tone": None,
        "true_hz": None if zone is None else f + 1e4,
        "zone": zone,
        "confidence": 0.9,
        "in_band": in_band,
    }


class TestIsAliased:
    def test_basic(self) -> None:
        assert is_aliased(_peak("alias", 1, 0, 2))
        assert not is_aliased(_peak("direct", 1, 0, 1))
        assert not is_aliased(_peak("unexplained", 1, 0, None))

    def test_edges(self) -> None:
        assert is_aliased(_peak("family", 1, 0, 3))
        assert not is_aliased(_peak("family", 1, 0, 1))
        assert is_aliased(_peak("mirror", 1, 0, 2))
        # The answer's own field wins when it has one.
        assert not is_aliased({**_peak("alias", 1, 0, 2), "aliased": False})


class TestSummaryRow:
    def test_basic(self) -> None:
        task = SimpleNamespace(
            row=4, recording="r.wav", channel=1, setup="s", sources_id="x", speed_rpm=900.0
        )
        payload = {
            "peaks": [
                _peak("alias", 100.0, -20.0, 2),
                _peak("alias", 200.0, -10.0, 3, in_band=False),  # louder, out of band
                _peak("alias", 300.0, -15.0, 2, source="fan"),  # strongest in band
                _peak("direct", 400.0, 0.0, 1),
                _peak("unexplained", 500.0, -30.0, None, source=None),
            ],
            "band_hz": [0.0, 5000.0],
            "nyquist_hz": 6400.0,
            "computation_version": "v",
        }
        s = summary_row(task, "k", "sha", payload)
        assert (s["n_peaks"], s["n_alias"], s["n_direct"], s["n_unexplained"]) == (5, 3, 1, 1)
        assert (s["n_aliased"], s["n_aliased_in_band"]) == (3, 2)
        assert (s["strongest_alias_hz"], s["strongest_alias_db"]) == (300.0, -15.0)
        assert s["strongest_alias_source"] == "fan"
        cols = peak_rows("k", "r.wav", 1, payload)
        assert cols["aliased"] == [True, True, True, False, False]
        assert cols["recording"] == ["r.wav"] * 5

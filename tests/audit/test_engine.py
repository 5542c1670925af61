"""The audit end to end on a real Dask scheduler and real worker processes."""

from __future__ import annotations

import math
import os
import signal
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest

from service.audit import run_audit
from service.audit.demo import DEMO_SETUPS
from service.contract.diagnose import DiagnoseIn
from service.demo import demo_sources
from service.usecases.diagnose import diagnose_payload
from service.usecases.measure import Upload

from .conftest import start_dask


def _audit(archive, out, address, settings, **kw):
    folder, manifest, library = archive
    return run_audit(
        manifest, library, folder, out, scheduler=address, progress=False, settings=settings, **kw
    )


class TestRunAudit:
    def test_basic(self, archive, dask_cluster, audit_settings, tmp_path: Path) -> None:
        s = _audit(archive, tmp_path / "out", dask_cluster.address, audit_settings)
        rec = pd.read_parquet(s.recordings_path)
        manifest = pd.read_csv(archive[1])
        # Every manifest row once, in order, counted in exactly one bucket.
        assert rec["row"].tolist() == list(range(len(manifest)))
        assert s.total == len(manifest) == s.computed + s.skipped + s.errors
        assert (s.computed, s.skipped, s.errors) == (15, 0, 3)
        peaks = pd.read_parquet(s.peaks_path)
        assert len(peaks) == s.peaks == rec["n_peaks"].sum()
        ok = rec[rec.status == "ok"]
        assert set(peaks["recording"]) == set(ok["recording"])
        # Per recording, the summary's counts are the peak table's counts.
        by = peaks.groupby("recording")
        assert (by.size().loc[ok.recording].to_numpy() == ok.n_peaks.to_numpy()).all()
        assert (by["aliased"].sum().loc[ok.recording].to_numpy() == ok.n_aliased).all()

    def test_aliases_fold_where_the_formula_says(
        self, archive, dask_cluster, audit_settings, tmp_path: Path
    ) -> None:
        s = _audit(archive, tmp_path / "out", dask_cluster.address, audit_settings)
        peaks = pd.read_parquet(s.peaks_path)
        rec = pd.read_parquet(s.recordings_path)
        rec = rec[rec.status == "ok"].set_index("recording")
        al = peaks[peaks.verdict == "alias"]
        assert len(al) > 0
        # Reference (DESIGN.md §2): fold(f, fs) = |f − fs·round(f/fs)| at the final rate.
        fs = 2 * rec.loc[al.recording, "nyquist_hz"].to_numpy()
        true, apparent = al.true_hz.to_numpy(), al.freq_hz.to_numpy()
        fold = np.abs(true - fs * np.round(true / fs))
        # Within the matching tolerance: 1 % speed tolerance of a line up to ~21 kHz.
        assert np.all(np.abs(fold - apparent) < 0.01 * true + 5.0)
        # Every true frequency of an alias lies above its channel's Nyquist frequency.
        assert np.all(true > fs / 2)

    def test_unsafe_setups_show_aliases_and_the_safe_one_none(
        self, archive, dask_cluster, audit_settings, tmp_path: Path
    ) -> None:
        s = _audit(archive, tmp_path / "out", dask_cluster.address, audit_settings)
        rec = pd.read_parquet(s.recordings_path)
        per = rec[rec.status == "ok"].groupby("setup")["n_alias"].sum()
        # Hand count of the demo's highest line: PWM 2·10 kHz + 2·f1 with f1 ≤ 4·200 Hz
        # is 21.6 kHz, below 25.6 kHz, so at 51.2 kS/s no source lies above Nyquist.
        assert per["eol-51k2-bw8"] == 0
        # At 12.8 kS/s the 10 kHz carrier lies above 6.4 kHz: it must fold.
        assert per["eol-12k8-bw2"] > 0 and per["eol-12k8-sliced"] > 0

    def test_errors(self, archive, dask_cluster, audit_settings, tmp_path: Path) -> None:
        s = _audit(archive, tmp_path / "out", dask_cluster.address, audit_settings)
        rec = pd.read_parquet(s.recordings_path)
        bad = rec[rec.status == "error"].set_index("recording")
        assert "No such file" in bad.loc["rec/missing.wav", "error"]
        assert "no-such-chain" in bad.loc["rec/00000-eol-12k8-bw2.wav", "error"]
        assert "WAV" in bad.loc["rec/broken.wav", "error"]
        assert bad["n_peaks"].isna().all()


class TestSameAsSingleDiagnosis:
    def test_basic(self, archive50, dask_cluster, audit_settings, tmp_path: Path) -> None:
        folder, manifest, _ = archive50
        s = _audit(archive50, tmp_path / "out", dask_cluster.address, audit_settings)
        peaks = pd.read_parquet(s.peaks_path)
        rec = pd.read_parquet(s.recordings_path)
        rows = pd.read_csv(manifest)
        assert len(rows) == 50 and s.computed == 50
        for i, row in rows.iterrows():
            # The reference: the single-recording use-case called directly, with the
            # request written out by hand (the demo's sources at this row's speed).
            spec = DEMO_SETUPS[row.chain_id][0]
            req = {**spec, "sources": demo_sources(row.speed_rpm), "speed_tolerance_pct": 1.0}
            upload = {"channel": 0}
            if not math.isnan(row.sample_rate_hz):
                upload["sample_rate_hz"] = row.sample_rate_hz
            req["upload"] = upload
            path = folder / row.path
            ref, _ = diagnose_payload(
                DiagnoseIn.model_validate(req),
                audit_settings,
                Upload(path.read_bytes(), path.name),
            )
            got = peaks[peaks.recording == row.path].reset_index(drop=True)
            want = ref["peaks"]
            assert len(got) == len(want) > 0, row.path
            assert got.verdict.tolist() == [p["verdict"] for p in want]
            for col in ("source", "tone"):  # Parquet nulls come back as NaN or None
                values = [None if pd.isna(v) else v for v in got[col]]
                assert values == [p[col] for p in want], col
            assert got.in_band.tolist() == [p["in_band"] for p in want]
            np.testing.assert_allclose(got.freq_hz, [p["freq_hz"] for p in want], rtol=1e-9)
            np.testing.assert_allclose(got.amplitude_db, [p["amplitude_db"] for p in want])
            np.testing.assert_allclose(got.confidence, [p["confidence"] for p in want], atol=1e-4)
            true = [np.nan if p["true_hz"] is None else p["true_hz"] for p in want]
            np.testing.assert_allclose(got.true_hz, true, rtol=1e-9)
            summary = rec.iloc[i]
            for verdict in ("alias", "direct", "family", "mirror", "unexplained"):
                assert summary[f"n_{verdict}"] == ref["counts"].get(verdict, 0), verdict
            assert summary.band_high_hz == ref["band_hz"][1]


class TestResume:
    def test_rerun_skips_everything(
        self, archive, dask_cluster, audit_settings, tmp_path: Path
    ) -> None:
        first = _audit(archive, tmp_path / "out", dask_cluster.address, audit_settings)
        again = _audit(archive, tmp_path / "out", dask_cluster.address, audit_settings)
        assert (again.computed, again.skipped, again.errors) == (0, first.computed, 3)
        a, b = (pd.read_parquet(x.peaks_path) for x in (first, again))
        pd.testing.assert_frame_equal(a, b)

    def test_interrupted_audit_resumes(
        self, archive, dask_cluster, audit_settings, tmp_path: Path
    ) -> None:
        out = tmp_path / "out"

        class Stop(Exception):
            pass

        def stop_after_six(done: int, total: int) -> None:
            if done >= 6:
                raise Stop

        with pytest.raises(Stop):
            _audit(
                archive,
                out,
                dask_cluster.address,
                audit_settings,
                chunk_size=1,
                window=2,
                flush_rows=2,
                on_progress=stop_after_six,
            )
        stored = sum(pq.read_metadata(p).num_rows for p in out.glob("parts/summary-*"))
        assert 0 < stored < 15
        s = _audit(archive, out, dask_cluster.address, audit_settings)
        # Only the rows not stored before the interruption are diagnosed again.
        assert (s.skipped, s.computed) == (stored, 15 - stored)
        assert len(pd.read_parquet(s.recordings_path)) == 18

    def test_changed_content_or_speed_is_recomputed(
        self, archive, dask_cluster, audit_settings, tmp_path: Path
    ) -> None:
        folder, manifest, library = archive
        out = tmp_path / "out"
        _audit(archive, out, dask_cluster.address, audit_settings)
        copy = tmp_path / "copy"
        copy.mkdir()
        table = pd.read_csv(manifest)
        for p in table.path.iloc[:15]:
            (copy / p).parent.mkdir(exist_ok=True)
            (copy / p).write_bytes((folder / p).read_bytes())
        # One file's samples change (a different capture), one row's speed changes.
        wav = table.path[5]
        data = bytearray((copy / wav).read_bytes())
        data[-4:] = b"\x00\x00\x80\x3f"  # last float32 sample becomes 1.0
        (copy / wav).write_bytes(bytes(data))
        table.loc[6, "speed_rpm"] += 100.0
        table.iloc[:15].to_csv(copy / "manifest.csv", index=False)
        s = run_audit(
            copy / "manifest.csv",
            library,
            copy,
            out,
            scheduler=dask_cluster.address,
            progress=False,
            settings=audit_settings,
        )
        assert (s.computed, s.skipped, s.errors) == (2, 13, 0)


class TestKilledWorker:
    def test_sigkill_mid_audit(self, archive, audit_settings, tmp_path: Path) -> None:
        procs = start_dask(2, tmp_path / "logs")
        killed = []

        def kill_one(done: int, total: int) -> None:
            if done >= 3 and not killed:
                victim = procs.workers[0]
                os.kill(victim.pid, signal.SIGKILL)
                victim.wait(timeout=30)
                killed.append(done)

        try:
            s = _audit(
                archive,
                tmp_path / "out",
                procs.address,
                audit_settings,
                chunk_size=1,
                window=4,
                on_progress=kill_one,
            )
        finally:
            procs.stop()
        assert killed and killed[0] < s.total  # the kill came before the end
        assert procs.workers[0].returncode == -signal.SIGKILL
        rec = pd.read_parquet(s.recordings_path)
        assert rec["row"].tolist() == list(range(18))  # every row exactly once
        assert (s.computed, s.errors) == (15, 3)
        peaks = pd.read_parquet(s.peaks_path)
        # No recording's peaks written twice: one key per recording, one block per key.
        assert peaks.groupby("recording")["key"].nunique().max() == 1
        assert len(peaks) == rec["n_peaks"].sum()


class TestCommand:
    def test_basic(self, archive, dask_cluster, tmp_path: Path, capsys) -> None:
        from service.cli.main import main

        _, manifest, library = archive
        code = main(
            [
                "audit",
                str(manifest),
                "--library",
                str(library),
                "--out",
                str(tmp_path / "o"),
                "--scheduler",
                dask_cluster.address,
                "--no-progress",
            ]
        )
        assert code == 0
        assert "18 rows: 15 diagnosed, 0 already done, 3 errors" in capsys.readouterr().out
        assert len(pd.read_parquet(tmp_path / "o" / "recordings.parquet")) == 18

    def test_errors(self, tmp_path: Path, capsys) -> None:
        from service.cli.main import main

        assert main(["audit", str(tmp_path / "none.csv"), "--no-progress"]) == 2
        assert "none.csv" in capsys.readouterr().err


class TestDuplicateRows:
    def test_same_file_and_settings_twice(
        self, archive, dask_cluster, audit_settings, tmp_path: Path
    ) -> None:
        folder, manifest, library = archive
        table = pd.read_csv(manifest).iloc[[0, 1, 0, 2, 0]]
        table.to_csv(tmp_path / "m.csv", index=False)
        for chunk in (1, 5):  # duplicates in separate tasks, then in one task
            out = tmp_path / f"out{chunk}"
            s = run_audit(
                tmp_path / "m.csv",
                library,
                folder,
                out,
                progress=False,
                scheduler=dask_cluster.address,
                settings=audit_settings,
                chunk_size=chunk,
            )
            rec = pd.read_parquet(s.recordings_path)
            peaks = pd.read_parquet(s.peaks_path)
            assert s.total == 5 and s.errors == 0
            n = rec.set_index("row")["n_peaks"]
            # Every manifest row gets its recording's peaks once: row 0's file three times.
            assert len(peaks) == n.sum() == 3 * n[0] + n[1] + n[3]
            assert (peaks.recording == table.path.iloc[0]).sum() == 3 * n[0]

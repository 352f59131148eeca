"""Batches: manifest and spec parsing, pass/fail, statistics, workers, resume,
bad input. Recordings are short simulations (16 kHz, about 2 s) with known
truth (characterize.simulate); two workers."""

from __future__ import annotations

import functools
import json
import os
from pathlib import Path

import numpy as np
import pytest
import scipy.stats
from click.testing import CliRunner

from characterize import batch as B
from characterize.cli import main
from characterize.errors import InputError
from characterize.excitation import SweepParams, make_sweep, sidecar_text
from characterize.simulate import Setup, simulate, write_recording

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "example_audio" / "batch"
RATE_HZ = 16000.0
TARGET_HZ = 300.0
SWEEP = SweepParams(start_hz=50.0, stop_hz=2500.0, duration_s=1.0, rate_hz=RATE_HZ,
                    level_dbfs=-12.0, fade_in_s=0.05, fade_out_s=0.01, tail_s=0.6)
SPEC = f"""\
name = "test family"
[f0]
target = "{TARGET_HZ:g} Hz"
tolerance = "2 %"
[q]
min = 12
max = 60
[flags]
fail = ["clipping", "out-of-band", "window-too-short"]
warn = ["poor-fit"]
[defaults]
sweep = "sweep.wav"
"""


def _write_sweep(folder: Path) -> None:
    import soundfile as sf

    s = make_sweep(SWEEP)
    sf.write(folder / "sweep.wav", s.samples, int(RATE_HZ), subtype="PCM_24")
    (folder / "sweep.toml").write_text(sidecar_text(SWEEP), encoding="utf-8")


@pytest.fixture(scope="module")
def family(tmp_path_factory: pytest.TempPathFactory) -> dict:
    """Ten simulated items (seeded: f0 spread 1.5 % around the target, Q 8 to 45,
    gains, delays and polarity varied) and one missing recording."""
    d = tmp_path_factory.mktemp("family")
    _write_sweep(d)
    rng = np.random.default_rng(2024)
    truth = {}
    rows = ["id,recording,inside,outside,note"]
    for k in range(10):
        f0 = TARGET_HZ * (1 + rng.normal(0, 0.015))
        q = 8.0 if k == 6 else float(rng.uniform(15, 45))
        setup = Setup(f0_hz=f0, q=q, rate_hz=RATE_HZ, snr_db=float(rng.uniform(32, 45)),
                      sweep=SWEEP, gain_inside=float(rng.uniform(0.6, 1.4)),
                      delay_s=float(rng.uniform(10e-6, 90e-6)), inverted=bool(k == 3))
        data, _ = simulate(setup, seed=int(rng.integers(1 << 30)))
        swap = k % 4 == 1  # channel order as an interface might have it
        write_recording(str(d / f"item-{k:02d}.flac"), data, RATE_HZ, "PCM_24",
                        order=(1, 0) if swap else (0, 1))
        inside, outside = (2, 1) if swap else ("", "")
        rows.append(f"item-{k:02d},item-{k:02d}.flac,{inside},{outside},simulated {k}")
        truth[f"item-{k:02d}"] = {"f0_hz": f0, "q": q}
    rows.append("ghost,ghost.flac,,,never recorded")
    (d / "manifest.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (d / "spec.toml").write_text(SPEC, encoding="utf-8")
    return {"dir": d, "truth": truth}


@pytest.fixture(scope="module")
def full_run(family: dict, tmp_path_factory: pytest.TempPathFactory) -> dict:
    out = tmp_path_factory.mktemp("full") / "out"
    d = family["dir"]
    summary = B.run(d / "manifest.csv", d / "spec.toml", out, workers=2)
    return {"out": out, "summary": summary}


# ------------------------------------------------------------------ spec


def _spec(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "spec.toml"
    p.write_text(text, encoding="utf-8")
    return p


@pytest.mark.parametrize("tol, half_width", [("2 %", 4.86), ("3 Hz", 3.0), ("0.5 %", 1.215),
                                             ("250 mHz", 0.25)])
def test_spec_tolerance_absolute_or_percent(tmp_path: Path, tol: str, half_width: float) -> None:
    # percent of the target, by hand: 243 Hz x 2 % = 4.86 Hz
    spec = B.read_spec(_spec(tmp_path, f'[f0]\ntarget = "243 Hz"\ntolerance = "{tol}"\n'))
    assert spec.f0_tolerance_hz == pytest.approx(half_width)
    assert spec.f0_lower_hz == pytest.approx(243 - half_width)
    assert spec.f0_upper_hz == pytest.approx(243 + half_width)


@pytest.mark.parametrize("body, match", [
    ('[f0]\ntarget = "243 Hz"\ntolerance = "0 %"\n', "greater than zero"),
    ('[f0]\ntarget = "243 Hz"\ntolerance = "-3 Hz"\n', "greater than zero"),
    ('[f0]\ntarget = "243 Hz"\ntolerance = "0 Hz"\n', "greater than zero"),
    ('[f0]\ntarget = "243 Hz"\ntolerance = 2\n', "unit"),
    ('[f0]\ntarget = "243 Hz"\n', "f0.tolerance: missing"),
    ('name = "x"\n', "missing table"),
    ('[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n[q]\nmin = 50\nmax = 20\n', "less than max"),
    ('[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n[q]\nminimum = 5\n', "did you mean 'min'"),
    ('[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n[flag]\n', "did you mean 'flags'"),
    ('[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n[flags]\nfail = ["clipings"]\n',
     "did you mean 'clipping'"),
    ('[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n[prediction]\nmax_mismatch = "0 %"\n',
     "greater than 0"),
    ('[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n[defaults]\nsweep = "nope.wav"\n',
     "not found"),
    ('[f0\n', "not valid TOML"),
])
def test_spec_errors_are_one_line(tmp_path: Path, body: str, match: str) -> None:
    with pytest.raises(InputError, match=match) as exc:
        B.read_spec(_spec(tmp_path, body))
    assert "\n" not in str(exc.value)
    assert str(tmp_path / "spec.toml") in str(exc.value)


# --------------------------------------------------------------- manifest


def _manifest(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "manifest.csv"
    p.write_text(text, encoding="utf-8")
    return p


@pytest.fixture
def plain_spec(tmp_path: Path) -> B.Spec:
    return B.read_spec(_spec(tmp_path, '[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n'))


def test_manifest_columns_defaults_and_paths(tmp_path: Path, plain_spec: B.Spec) -> None:
    p = _manifest(tmp_path, 'ID;Recording;inside;outside;note\n'
                  'a;sub/a.flac;2;1;"quoted; with ""quotes"""\n\nb;/abs/b.wav;;;\n')
    m = B.read_manifest(p, plain_spec)
    assert [i.id for i in m.items] == ["a", "b"]
    a, b = m.items
    assert (a.inside, a.outside, b.inside, b.outside) == (2, 1, 1, 2)
    assert a.recording_path == str(tmp_path / "sub" / "a.flac")
    assert b.recording_path == "/abs/b.wav"
    assert a.note == 'quoted; with "quotes"'  # RFC 4180 quoting
    assert (a.row, b.row) == (2, 4)  # spreadsheet rows, the blank line counted


@pytest.mark.parametrize("text, match", [
    ("id,recordng\na,a.flac\n", r"row 1, column 'recordng': unknown column; did you mean "
                                "'recording'"),
    ("id,recording,notes\na,a.flac,x\n", "did you mean 'note'"),
    ("id,file\na,a.flac\n", "did you mean"),
    ("id,recording\na,a.flac\nb,b.flac\na,c.flac\n", r"row 4, column 'id': duplicate id 'a' "
                                                     r"\(also on row 2\)"),
    ("id,recording\nJar-1,a.flac\njar-1,b.flac\n", "differ only in case"),
    ("", "empty manifest"),
    ("\n\n", "empty manifest"),
    ("id,recording\n", "no items"),
    ("id,note\na,x\n", "missing required column 'recording'"),
    ("id,recording\n,a.flac\n", "row 2, column 'id': empty"),
    ("id,recording\na,\n", "row 2, column 'recording': empty"),
    ("id,recording,inside\na,a.flac,zero\n", "row 2, column 'inside'"),
    ("id,recording,inside\na,a.flac,0\n", "channel number from 1"),
    ("id,recording,inside,outside\na,a.flac,2,2\n", "both are channel 2"),
    ("id,recording\na,a.flac,extra\n", "3 cells but the header has 2"),
    ("id,recording,id\na,a.flac,b\n", "more than once"),
])
def test_manifest_errors_name_file_row_column(tmp_path: Path, plain_spec: B.Spec, text: str,
                                              match: str) -> None:
    p = _manifest(tmp_path, text)
    with pytest.raises(InputError, match=match) as exc:
        B.read_manifest(p, plain_spec)
    assert "\n" not in str(exc.value) and str(p) in str(exc.value)


def test_manifest_not_found_and_not_utf8(tmp_path: Path, plain_spec: B.Spec) -> None:
    with pytest.raises(InputError, match="file not found"):
        B.read_manifest(tmp_path / "nope.csv", plain_spec)
    p = tmp_path / "latin1.csv"
    p.write_bytes("id,recording,note\na,a.flac,caf\xe9\n".encode("latin-1"))
    with pytest.raises(InputError, match="not UTF-8"):
        B.read_manifest(p, plain_spec)


@pytest.mark.parametrize("item_id", ["jar-01", "J.2_b", "<script>alert(1)</script>", "a/../b",
                                     "..", "CON", "naïve jar", " x"])
def test_item_file_names_are_safe(item_id: str) -> None:
    stem = B.item_file_stem(item_id)
    assert "/" not in stem and "\\" not in stem and not stem.startswith(".")
    assert all(c.isascii() and (c.isalnum() or c in "._-") for c in stem)
    if item_id in ("jar-01", "J.2_b"):
        assert stem == item_id  # plain ids keep their name: DIR/items/ID.json


# -------------------------------------------------------------- verdicts


def _doc(f0: float, q: float, pred: float | None = None, flags: tuple = ()) -> dict:
    return {"schema": "characterize.result/1", "fit": {"f0_hz": f0, "q": q},
            "prediction": None if pred is None else {"f0_hz": pred},
            "flags": [{"code": c, "severity": s, "message": "m"} for c, s in flags]}


def test_judge_on_a_seeded_family(tmp_path: Path) -> None:
    spec = B.read_spec(_spec(tmp_path, '[f0]\ntarget = "243 Hz"\ntolerance = "4 Hz"\n'
                                       '[q]\nmin = 20\nmax = 50\n[prediction]\n'
                                       'max_mismatch = "5 %"\n[flags]\nfail = ["clipping"]\n'
                                       'warn = ["poor-fit"]\n'))
    rng = np.random.default_rng(7)
    for _ in range(400):
        f0 = 243 + rng.normal(0, 4)
        q = rng.uniform(10, 60)
        pred = f0 * (1 + rng.normal(0, 0.05))
        flags = [("clipping", "warning")] if rng.random() < 0.1 else []
        flags += [("poor-fit", "warning")] if rng.random() < 0.2 else []
        flags += [("made-up", "error")] if rng.random() < 0.05 else []
        v = B.judge(_doc(f0, q, pred, tuple(flags)), spec)
        # the rule as the spec states it, evaluated directly
        ok = (abs(f0 - 243) <= 4 and 20 <= q <= 50 and abs(f0 / pred - 1) <= 0.05
              and not any(c in ("clipping", "made-up") for c, _ in flags))
        assert v.status == ("pass" if ok else "fail")
        assert any("poor-fit" in w for w in v.warnings) == any(c == "poor-fit" for c, _ in flags)
    v = B.judge(_doc(243.0, 30.0), spec)  # no prediction: warned, not failed
    assert v.status == "pass" and any("not checked" in w for w in v.warnings)


# ------------------------------------------------------------- statistics


@pytest.mark.parametrize("seed", range(12))
def test_statistics_equal_numpy_and_scipy(seed: int) -> None:
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 300))
    x = rng.normal(rng.uniform(100, 1000), rng.uniform(0.1, 20), n)
    if seed % 3 == 0:
        x[: max(1, n // 20)] += rng.uniform(30, 80)  # a few gross errors
    lsl, usl = float(np.mean(x) - rng.uniform(5, 40)), float(np.mean(x) + rng.uniform(5, 40))
    xs = [float(v) for v in x]
    s = np.std(x, ddof=1)
    assert B.sample_std(xs) == pytest.approx(s, rel=1e-12)
    assert B.sample_std(xs) == pytest.approx(scipy.stats.tstd(x), rel=1e-12)
    cp, cpk = B.process_capability(xs, lsl, usl)
    # Cp = (USL-LSL)/6s, Cpk = min(USL-mean, mean-LSL)/3s (Kane 1986; common practice)
    assert cp == pytest.approx((usl - lsl) / (6 * s), rel=1e-12)
    assert cpk == pytest.approx(min(usl - np.mean(x), np.mean(x) - lsl) / (3 * s), rel=1e-12)
    z = B.modified_z_scores(xs)
    if n >= 3:
        mad = scipy.stats.median_abs_deviation(x)  # scale 1: the raw MAD
        np.testing.assert_allclose(z, 0.6745 * (x - np.median(x)) / mad, rtol=1e-12)
    lim = B.individuals_limits(xs)
    sigma = np.mean(np.abs(np.diff(x))) / 1.128  # moving range / d2 (Montgomery 2009)
    assert lim is not None
    np.testing.assert_allclose(lim, [np.mean(x), np.mean(x) - 3 * sigma,
                                     np.mean(x) + 3 * sigma, sigma], rtol=1e-12)


def test_cpk_of_a_centred_process_at_three_sigma_is_one() -> None:
    # Definition (common practice): limits at mean +- 3 sigma give Cp = Cpk = 1, and a
    # normal process then has 2 Phi(-3) = 0.27 % outside (scipy.stats.norm).
    rng = np.random.default_rng(11)
    x = rng.normal(243.0, 1.5, 200_000)
    cp, cpk = B.process_capability(list(x), 243.0 - 4.5, 243.0 + 4.5)
    assert cp == pytest.approx(1.0, abs=0.01) and cpk == pytest.approx(1.0, abs=0.01)
    outside = np.mean((x < 238.5) | (x > 247.5))
    assert outside == pytest.approx(2 * scipy.stats.norm.cdf(-3 * cpk), rel=0.1)
    assert B.process_capability([1.0], 0, 2) == (None, None)
    assert B.process_capability([1.0, 1.0], 0, 2) == (None, None)


# ---------------------------------------------------------------- batches


def test_full_batch_recovers_the_truth(family: dict, full_run: dict) -> None:
    s: B.BatchSummary = full_run["summary"]
    out: Path = full_run["out"]
    truth = family["truth"]
    by_id = {i.id: i for i in s.items}
    assert [i.id for i in s.items] == [f"item-{k:02d}" for k in range(10)] + ["ghost"]
    # the missing recording is a failed item with its reason; the others all have results
    ghost = by_id["ghost"]
    assert ghost.status == "error" and "file not found" in ghost.reasons[0]
    fail_doc = json.loads((out / "items" / "ghost.json").read_text())
    assert fail_doc["schema"] == B.FAILURE_SCHEMA and fail_doc["error"]["kind"] == "input"
    lo, hi = TARGET_HZ * 0.98, TARGET_HZ * 1.02
    for item_id, t in truth.items():
        it = by_id[item_id]
        assert it.status in ("pass", "fail")
        assert it.f0_hz == pytest.approx(t["f0_hz"], rel=1e-3)  # simulator truth, DESIGN §4
        assert it.q == pytest.approx(t["q"], rel=0.05)
        doc = json.loads((out / it.document).read_text())
        assert doc["schema"] == "characterize.result/1" and doc["fit"]["f0_hz"] == it.f0_hz
        assert (out / it.plot).stat().st_size > 1000
        # expected verdict from the truth, where the truth is clearly inside or outside
        if min(abs(t["f0_hz"] - lo), abs(t["f0_hz"] - hi)) > 0.2 and abs(t["q"] - 12) > 1:
            expect = "pass" if lo <= t["f0_hz"] <= hi and 12 <= t["q"] <= 60 else "fail"
            assert it.status == expect, (item_id, t, it.reasons)
    assert by_id["item-06"].status == "fail" and "below the minimum" in by_id["item-06"].reasons[0]
    # statistics from the item documents equal numpy/scipy on the same numbers
    f0 = np.array([i.f0_hz for i in s.items if i.status != "error"])
    q = np.array([i.q for i in s.items if i.status != "error"])
    st = s.stats
    assert (st.n_items, st.n_error) == (11, 1)
    assert st.n_pass == sum(i.status == "pass" for i in s.items)
    assert st.pass_rate == pytest.approx(st.n_pass / 11)
    assert st.f0_mean_hz == pytest.approx(np.mean(f0), rel=1e-12)
    assert st.f0_std_hz == pytest.approx(np.std(f0, ddof=1), rel=1e-10)
    assert st.q_mean == pytest.approx(np.mean(q), rel=1e-12)
    assert st.q_std == pytest.approx(scipy.stats.tstd(q), rel=1e-10)
    sd = np.std(f0, ddof=1)
    assert st.cpk == pytest.approx(min(hi - f0.mean(), f0.mean() - lo) / (3 * sd), rel=1e-9)
    z = 0.6745 * (q - np.median(q)) / scipy.stats.median_abs_deviation(q)
    ids = [i.id for i in s.items if i.status != "error"]
    assert {o.id for o in st.outliers if o.quantity == "q"} == {
        i for i, zi in zip(ids, z, strict=True) if abs(zi) > 3.5}
    # reports exist; summary.json matches the summary
    for name in B.REPORT_FILES:
        assert (out / name).stat().st_size > 100
    doc = json.loads((out / "summary.json").read_text())
    assert doc["schema"] == B.BATCH_SCHEMA and len(doc["items"]) == 11
    assert doc["stats"]["cpk"] == pytest.approx(st.cpk)


def _counting_analyze(recording, *, log: str, die_after: int | None = None,
                      raise_after: int | None = None, **kw):
    """analyze() that logs each call; once more than ``die_after`` calls were
    logged it kills its worker process (as a crash or kill -9 would), once more
    than ``raise_after`` it raises."""
    from characterize.pipeline import analyze

    with open(log, "a", encoding="utf-8") as fh:
        fh.write(Path(recording).stem + "\n")
    n = len(Path(log).read_text(encoding="utf-8").splitlines())
    if die_after is not None and n > die_after:
        os._exit(17)
    if raise_after is not None and n > raise_after:
        raise RuntimeError("simulated worker failure")
    return analyze(recording, **kw)


def test_resume_after_a_killed_worker(family: dict, full_run: dict, tmp_path: Path) -> None:
    d = family["dir"]
    out = tmp_path / "out"
    log1, log2 = tmp_path / "run1.log", tmp_path / "run2.log"
    dying = functools.partial(_counting_analyze, log=str(log1), die_after=4)
    with pytest.raises(B.BatchInterrupted, match="--resume"):
        B.run(d / "manifest.csv", d / "spec.toml", out, workers=2, analyze_fn=dying)
    assert not (out / "summary.json").exists()
    finished = {p.stem: p.stat().st_mtime_ns for p in (out / "items").glob("*.json")
                if json.loads(p.read_text())["schema"] == "characterize.result/1"}
    assert 1 <= len(finished) <= 5  # what was done before the worker died is on disk
    # without --resume or --force the old items are not overwritten
    with pytest.raises(InputError, match="--resume"):
        B.run(d / "manifest.csv", d / "spec.toml", out, workers=2)
    counting = functools.partial(_counting_analyze, log=str(log2))
    summary = B.run(d / "manifest.csv", d / "spec.toml", out, workers=2, resume=True,
                    analyze_fn=counting)
    recomputed = set(log2.read_text().split())
    assert recomputed.isdisjoint(finished)  # finished items were not recomputed
    assert recomputed == {i.id for i in summary.items} - set(finished)  # the rest was
    for stem, mtime in finished.items():
        assert (out / "items" / f"{stem}.json").stat().st_mtime_ns == mtime
    assert summary.run["kept_items"] == len(finished)
    # the final summary equals the uninterrupted run's (run times aside)
    a = json.loads((out / "summary.json").read_text())
    b = json.loads((full_run["out"] / "summary.json").read_text())
    a.pop("run"), b.pop("run")
    assert a == b
    assert (out / "summary.csv").read_text() == (full_run["out"] / "summary.csv").read_text()


def test_resume_after_a_worker_that_raises(family: dict, full_run: dict, tmp_path: Path) -> None:
    d = family["dir"]
    out = tmp_path / "out"
    log1, log2 = tmp_path / "run1.log", tmp_path / "run2.log"
    raising = functools.partial(_counting_analyze, log=str(log1), raise_after=3)
    first = B.run(d / "manifest.csv", d / "spec.toml", out, workers=2, analyze_fn=raising)
    # the batch went on: three items done, the rest recorded as failed with the reason
    assert sum(i.status != "error" for i in first.items) == 3
    crashed = [i for i in first.items if i.status == "error" and i.id != "ghost"]
    assert len(crashed) == 7 and all("simulated worker failure" in i.reasons[0] for i in crashed)
    done = {i.id: (out / i.document).stat().st_mtime_ns for i in first.items
            if i.status != "error"}
    summary = B.run(d / "manifest.csv", d / "spec.toml", out, workers=2, resume=True,
                    analyze_fn=functools.partial(_counting_analyze, log=str(log2)))
    assert set(log2.read_text().split()) == {i.id for i in first.items} - set(done)
    assert {i: (out / "items" / f"{i}.json").stat().st_mtime_ns for i in done} == done
    a = json.loads((out / "summary.json").read_text())
    b = json.loads((full_run["out"] / "summary.json").read_text())
    a.pop("run"), b.pop("run")
    assert a == b
    assert summary.stats == full_run["summary"].stats


def test_resume_redoes_items_made_from_other_inputs(family: dict, full_run: dict,
                                                    tmp_path: Path) -> None:
    import shutil

    out = tmp_path / "out"
    shutil.copytree(full_run["out"], out)
    doc_path = out / "items" / "item-02.json"
    doc = json.loads(doc_path.read_text())
    doc["batch_item"]["inside"] = 2  # as if the manifest had said otherwise
    doc_path.write_text(json.dumps(doc))
    (out / "items" / "item-05.json").write_text("{ half a file")  # a torn write
    log = tmp_path / "log"
    d = family["dir"]
    B.run(d / "manifest.csv", d / "spec.toml", out, workers=2, resume=True,
          analyze_fn=functools.partial(_counting_analyze, log=str(log)))
    # those two, and the failed item (failures are retried), nothing else
    assert sorted(log.read_text().split()) == ["ghost", "item-02", "item-05"]


# -------------------------------------------------------------------- CLI


def _one_line_error(result) -> str:
    err = result.stderr.strip()
    assert result.exit_code == 2, (result.exit_code, result.output)
    assert len(err.splitlines()) == 1 and "Traceback" not in result.output, err
    return err


def test_cli_example_batch(tmp_path: Path) -> None:
    out = tmp_path / "out"
    runner = CliRunner()
    args = ["batch", str(EXAMPLE / "manifest.csv"), "--spec", str(EXAMPLE / "spec.toml"),
            "--out", str(out), "--workers", "2"]
    r = runner.invoke(main, args)
    assert r.exit_code == 1, r.output  # three jars fail, one recording is broken
    assert "12 items: 8 pass, 3 fail, 1 without a result" in r.stdout
    truth = json.loads((EXAMPLE / "truth.json").read_text())["items"]
    doc = json.loads((out / "summary.json").read_text())
    status = {i["id"]: i["status"] for i in doc["items"]}
    assert status == {**{k: "pass" for k in truth}, "jar-04": "fail", "jar-07": "fail",
                      "jar-10": "fail", "jar-09": "error"}
    for it in doc["items"]:
        if it["status"] != "error":  # simulator truth (make_batch.py), DESIGN §4
            assert it["f0_hz"] == pytest.approx(truth[it["id"]]["f0_hz"], rel=1e-3)
    # a second run refuses to overwrite; --resume recomputes nothing but the broken item
    _one_line_error(runner.invoke(main, args))
    r = runner.invoke(main, [*args, "--resume"])
    assert r.exit_code == 1
    assert json.loads((out / "summary.json").read_text())["run"]["computed_items"] == 1


def test_cli_all_pass_exits_0(family: dict, tmp_path: Path) -> None:
    d = family["dir"]
    m = tmp_path / "m.csv"
    passing = [i for i, t in family["truth"].items()  # (items 1, 5, 9 have swapped channels)
               if abs(t["f0_hz"] / TARGET_HZ - 1) < 0.015 and 14 < t["q"] < 58
               and int(i[-2:]) % 4 != 1][:2]
    m.write_text("id,recording\n" + "".join(f"{i},{d / i}.flac\n" for i in passing))
    r = CliRunner().invoke(main, ["batch", str(m), "--spec", str(d / "spec.toml"),
                                  "--out", str(tmp_path / "o"), "--workers", "2"])
    assert r.exit_code == 0, (r.output, r.exception)
    assert "2 items: 2 pass, 0 fail" in r.stdout


@pytest.mark.parametrize("manifest, spec, match", [
    ("id,recordng\na,a.flac\n", None, "did you mean 'recording'"),
    ("id,recording\na,a.flac\na,b.flac\n", None, "duplicate id 'a'"),
    ("", None, "empty manifest"),
    ("id,recording\n", None, "no items"),
    (None, None, "manifest.csv: file not found"),
    ("id,recording\na,a.flac\n", '[f0]\ntarget = "243 Hz"\ntolerance = "0 %"\n',
     "f0.tolerance: must be greater than zero"),
    ("id,recording\na,a.flac\n", '[f0]\ntarget = "243 Hz"\ntolerance = "-2 Hz"\n',
     "f0.tolerance: must be greater than zero"),
    ("id,recording\na,a.flac\n", None, None),  # spec file missing
])
def test_cli_bad_input_is_one_line_exit_2(tmp_path: Path, manifest: str | None,
                                          spec: str | None, match: str | None) -> None:
    if manifest is not None:
        (tmp_path / "manifest.csv").write_text(manifest, encoding="utf-8")
    spec_path = tmp_path / "spec.toml"
    if match is not None:
        spec_path.write_text(spec or '[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n')
    r = CliRunner().invoke(main, ["batch", str(tmp_path / "manifest.csv"), "--spec",
                                  str(spec_path), "--out", str(tmp_path / "out")])
    err = _one_line_error(r)
    assert (match or "spec.toml: file not found") in err
    assert not (tmp_path / "out").exists()  # nothing started


def test_cli_usage_errors(tmp_path: Path) -> None:
    runner = CliRunner()
    _one_line_error(runner.invoke(main, ["batch", "m.csv", "--out", str(tmp_path)]))  # no --spec
    _one_line_error(runner.invoke(main, ["batch", "m.csv", "--spec", "s.toml", "--out",
                                         str(tmp_path), "--workers", "0"]))
    f = tmp_path / "file"
    f.write_text("x")
    (tmp_path / "m.csv").write_text("id,recording\na,a.flac\n")
    (tmp_path / "s.toml").write_text('[f0]\ntarget = "243 Hz"\ntolerance = "2 %"\n')
    err = _one_line_error(runner.invoke(main, ["batch", str(tmp_path / "m.csv"), "--spec",
                                               str(tmp_path / "s.toml"), "--out", str(f)]))
    assert "is a file" in err


def test_default_workers_is_all_cores() -> None:
    n = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    assert B.default_workers() == n


def test_batch_command_import_is_light() -> None:
    import subprocess
    import sys

    code = ("import sys, characterize.cli, characterize.commands.batch; "
            "print(' '.join(m for m in ('matplotlib', 'scipy', 'lmfit', 'jinja2') "
            "if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.split() == []

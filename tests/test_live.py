"""Measuring live on the simulated bench: measure, tune, take checks, bad input.

Truth comes from the simulated bench (characterize.simulate's chain around a
seeded "true" object whose f0 follows the lumped law with its true end
correction and volume; Rayleigh 1896). Families are judged by their worst
member. The real PortAudio path is tested in tests/test_live_loopback.py.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from click.testing import CliRunner

from characterize.cli import main
from characterize.errors import FitError, InputError
from characterize.excitation import SweepParams, make_sweep
from characterize.live.bench import parse_simulate
from characterize.live.measure import MeasureInterrupted, MeasureSettings, measure
from characterize.live.session import (
    TuneSession,
    cents,
    object_toml,
    parse_change,
    parse_tolerance,
)
from characterize.live.simbench import SimulatedBench
from characterize.live.stream import TakeInterrupted
from characterize.live.takes import check_take, find_delay
from characterize.objectfile import load_object

EX = Path(__file__).resolve().parent.parent / "example_audio"
JAR = EX / "listening-jar-04.toml"
JAR7 = EX / "trim-series" / "listening-jar-07.toml"
FAST = MeasureSettings(duration_s=1.5)


def run(*args: object) -> tuple[int, str, str]:
    r = CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)
    return r.exit_code, r.stdout, r.stderr


def one_line_error(code: int, err: str, *needles: str) -> None:
    assert code == 2, err
    lines = [ln for ln in err.strip().splitlines() if ln.startswith("characterize:")]
    assert len(lines) == 1 and "Traceback" not in err, err
    for n in needles:
        assert n in lines[0], lines[0]


# ----------------------------------------------------------------- measure
def test_measure_recovers_simulated_f0_and_q_over_objects(tmp_path):
    """Six objects (jars, a bottle profile, an absorber, a port, a perforated plate),
    each a seeded true object off its file by up to 3 %: the worst |z| of f0 and Q
    against the truth stays within 4 standard errors, and f0 within 1e-4."""
    worst_z, worst_rel = 0.0, 0.0
    for seed, name in enumerate(["listening-jar-04", "trim-series/listening-jar-07",
                                 "absorber-cell-b2", "port-check-k1", "cider-bottle-b7",
                                 "perforated-cell-h4"]):
        obj = EX / f"{name}.toml"
        bench = SimulatedBench.from_object_file(obj, seed=seed, dropout_probability=0.0)
        m = measure(bench, obj, FAST, tmp_path / f"m{seed}")
        t, f = bench.truth(), m.result.fit
        worst_z = max(worst_z, abs(f.f0_hz - t["f0_hz"]) / f.f0_stderr_hz,
                      abs(f.q - t["q"]) / f.q_stderr)
        worst_rel = max(worst_rel, abs(f.f0_hz / t["f0_hz"] - 1), abs(f.q / t["q"] - 1) / 100)
    assert worst_z < 4.0
    assert worst_rel < 1e-4


def test_measure_cli_writes_fit_outputs_takes_and_measurement_block(tmp_path):
    out = tmp_path / "m"
    code, stdout, err = run("measure", "--object", JAR, "--device", "simulate", "--seed", 4,
                            "--duration", 1.5, "--repeats", 3, "--out", out, "--json")
    assert code == 0, err
    assert "CAUTION" in err  # the usual caution, before anything plays
    doc = json.loads(stdout)
    assert doc["schema"] == "characterize.result/1"
    md = doc["measurement"]
    assert md["device"]["kind"] == "simulated" and md["rate_hz"] == 48000.0
    assert md["level_dbfs"] <= md["max_level_dbfs"] == -12.0
    assert len(md["takes"]) == 3
    r = md["repeats"]
    truth = md["simulated_truth"]
    assert r["n"] == 3 and r["f0_spread_hz"] > 0
    # the mean is within its own standard error (spread/sqrt(n)) or the fit's of the truth
    assert abs(r["f0_mean_hz"] - truth["f0_hz"]) < 4 * max(r["f0_mean_stderr_hz"],
                                                          r["f0_fit_stderr_hz"])
    for name in ("result.json", "response.png", "transfer.csv", "report.html", "report.pdf",
                 "take-01.flac", "take-01.json", "take-03.result.json", "probe.flac"):
        assert (out / name).exists(), name
    side = json.loads((out / "take-01.json").read_text())
    for key in ("device", "rate_hz", "level_dbfs", "inside_channel", "outside_channel",
                "time_utc", "stream_status", "check"):
        assert key in side
    # fit redoes the take from the saved files alone: the same f0 and Q
    code, stdout, err = run("fit", out / "take-01.flac", "--sweep", Path(md["takes"][0]["sweep"]),
                            "--object", JAR, "--json")
    assert code == 0, err
    redo = json.loads(stdout)["fit"]
    assert redo["f0_hz"] == pytest.approx(md["takes"][0]["f0_hz"], rel=1e-9)
    assert redo["q"] == pytest.approx(md["takes"][0]["q"], rel=1e-9)
    # never overwritten
    code, _, err = run("measure", "--object", JAR, "--device", "simulate", "--out", out)
    one_line_error(code, err, str(out))


def test_dropout_and_silent_takes_are_repeated_and_kept(tmp_path):
    """Play 1 is the probe; play 2 gets a gap of zeros, play 3 comes back silent:
    both are kept under -rejected names and the take is repeated."""
    bench = SimulatedBench.from_object_file(JAR, seed=1, dropout_probability=0.0,
                                            dropout_takes=[2], silent_takes=[3])
    said: list[str] = []
    m = measure(bench, JAR, FAST, tmp_path, say=said.append)
    take = m.takes[0]
    assert len(take.rejected) == 2
    assert "gap" in take.rejected[0]["reason"]
    assert "all zeros" in take.rejected[1]["reason"]
    assert all(Path(r["file"]).exists() for r in take.rejected)
    assert any("repeating the take" in s for s in said)
    assert take.path.name == "take-01.flac" and m.result is not None


def test_clipping_lowers_the_level_within_max_level(tmp_path):
    """At -6 dBFS the inside channel of this Q=61 jar clips (simulated full scale):
    the level is lowered and the take repeated; never above --max-level."""
    bench = SimulatedBench.from_object_file(JAR, seed=2, dropout_probability=0.0)
    s = MeasureSettings(duration_s=1.5, level_dbfs=-6.0, max_level_dbfs=-6.0, probe=False)
    said: list[str] = []
    m = measure(bench, JAR, s, tmp_path, say=said.append)
    assert m.takes[0].rejected and "clipping" in m.takes[0].rejected[0]["reason"]
    assert m.level_dbfs < -6.0
    assert max(m.takes[0].check.peaks_dbfs.values()) < -0.1
    assert any("lowering the level" in x for x in said)


def test_probe_lowers_a_clipping_level_before_the_sweep(tmp_path):
    bench = SimulatedBench.from_object_file(JAR, seed=2, dropout_probability=0.0)
    s = MeasureSettings(duration_s=1.5, level_dbfs=-6.0, max_level_dbfs=-6.0)
    m = measure(bench, JAR, s, tmp_path)
    assert m.probe is not None and m.probe["level_chosen_dbfs"] < -6.0
    assert m.level_dbfs <= m.probe["level_chosen_dbfs"]


def test_too_quiet_says_by_how_much_and_what_to_do(tmp_path):
    bench = SimulatedBench.from_object_file(JAR, seed=3, dropout_probability=0.0)
    said: list[str] = []
    m = measure(bench, JAR, MeasureSettings(duration_s=1.5, level_dbfs=-80.0), tmp_path,
                say=said.append)
    quiet = [x for x in said if "too quiet" in x or "only" in x]
    assert quiet and "dB short" in quiet[0] and "--level" in quiet[0]
    assert m.takes  # it still measures; the user decides


def test_ctrl_c_keeps_what_was_recorded(tmp_path):
    class Stopped(SimulatedBench):
        def play_record(self, signal, rate_hz, in_channels):
            take = super().play_record(signal, rate_hz, in_channels)
            if self.plays == 2:
                take.frames = take.frames // 3
                take.interrupted = True
                raise TakeInterrupted(take)
            return take

    bench = Stopped(load_object(JAR), SimulatedBench.from_object_file(JAR).air, seed=0,
                    dropout_probability=0.0)
    with pytest.raises(MeasureInterrupted) as info:
        measure(bench, JAR, FAST, tmp_path)
    flac = [p for p in info.value.saved if p.name == "take-01.flac"]
    assert flac and sf.info(str(flac[0])).frames > 0
    assert json.loads(flac[0].with_suffix(".json").read_text())["interrupted"] is True


def test_ctrl_c_exits_130(tmp_path, monkeypatch):
    def stop(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(SimulatedBench, "play_record", stop)
    code, _, err = run("measure", "--object", JAR, "--device", "simulate", "--out",
                       tmp_path / "x")
    assert code == 130 and "Ctrl-C" in err and "Traceback" not in err


def test_no_good_take_exits_1_keeping_all(tmp_path):
    bench = SimulatedBench.from_object_file(JAR, seed=0, dropout_probability=1.0)
    with pytest.raises(FitError, match="no clean take"):
        measure(bench, JAR, MeasureSettings(duration_s=1.0, probe=False, max_tries=2), tmp_path)
    assert len(list(tmp_path.glob("take-01-rejected-*.flac"))) == 2


# ----------------------------------------------------------------- tune
def _tune_auto(obj: Path, seed: int, out: Path, route: str = "neck",
               factor: float = 1.2) -> tuple[dict, float, int]:
    start = SimulatedBench.from_object_file(obj, seed=seed,
                                            end_correction_factor=factor).truth()["f0_hz"]
    target = 1.03 * start
    code, stdout, err = run("tune", "--object", obj, "--target", f"{target:.6f}", "--route",
                            route, "--device", f"simulate:end_correction={factor},dropouts=0",
                            "--seed", seed, "--auto", "--duration", 1.5, "--out", out)
    assert code == 0, stdout + err
    return json.loads((out / "session.json").read_text()), target, code


def test_tune_auto_reaches_3_percent_up_with_end_correction_20_percent_off(tmp_path):
    """The done-when of the issue: a target 3 % above the start, a true end correction
    1.2 x the textbook one; reached within the tolerance (5 cents) in at most 5 steps,
    for every member of a small family (objects, seeds, routes), judged by the worst.
    The truth (not only the measurement) must be within the tolerance at the end."""
    cases = [(JAR7, 0, "neck"), (JAR, 1, "neck"), (EX / "cider-bottle-b7.toml", 2, "neck"),
             (JAR7, 3, "volume")]
    worst_steps, worst_cents = 0, 0.0
    for i, (obj, seed, route) in enumerate(cases):
        d, target, _ = _tune_auto(obj, seed, tmp_path / f"t{i}", route)
        assert d["reached"], d
        worst_steps = max(worst_steps, d["steps"])
        worst_cents = max(worst_cents, abs(cents(d["simulated_truth"]["f0_hz"], target)))
        assert d["simulated_truth"]["end_correction_factor"] == pytest.approx(1.2)
    assert worst_steps <= 5
    assert worst_cents <= 5.0
    out = tmp_path / "t0"
    assert (out / "tune.png").stat().st_size > 0
    log = (out / "log.csv").read_text().splitlines()
    assert log[0].startswith("step,event,f0_hz")
    assert any(r.split(",")[1] == "change" for r in log[1:])
    assert (out / "step-01" / "result.json").exists()
    assert (out / "step-01" / "take-01.flac").exists()
    doc = json.loads((out / "step-01" / "result.json").read_text())
    assert doc["tune"]["advice_from"] == "trim" and "measurement" in doc


def test_series_refines_the_advice_after_three_steps(tmp_path):
    """Small typed cuts (0.5 mm each) on a jar whose volume is 3 % off: from the third
    distinct length the advice comes from the series line, whose end correction
    matches the simulated truth's lumped-equivalent one (volume error absorbed in the
    line's slope, not in delta: Rayleigh's series method)."""
    bench = SimulatedBench(load_object(JAR7), SimulatedBench.from_object_file(JAR7).air,
                           seed=5, end_correction_factor=1.2, volume_factor=1.03,
                           dropout_probability=0.0)
    target = 1.03 * bench.truth()["f0_hz"]
    s = TuneSession(bench, JAR7, target, "neck", parse_tolerance("5 cents", target),
                    tmp_path / "s", FAST)
    for _ in range(3):
        st = s.measure_step()
        s.record_change(0.5e-3)
    st = s.measure_step()
    assert st.advice_from == "series"
    delta = st.series.end_correction_m
    truth = bench.truth()["end_correction_m"]
    assert abs(delta - truth) < max(4 * st.series.end_correction_stderr_m, 1e-4)
    # the series' cut lands on the target (the truth after the advised cut)
    bench.apply_change("neck", st.advised)
    assert abs(cents(bench.truth()["f0_hz"], target)) < 2.0


def test_tune_reads_lines_logs_changes_and_stops_on_q(tmp_path):
    out = tmp_path / "t"
    r = CliRunner().invoke(main, ["tune", "--object", str(JAR7), "--target", "180",
                                  "--device", "simulate:dropouts=0", "--duration", "1.5",
                                  "--out", str(out)],
                           input="1.5 mm\n\nnonsense\n0.5\nq\n", catch_exceptions=False)
    assert r.exit_code == 1, r.stdout + r.stderr  # stopped before the target
    assert "not taken" in r.stderr
    log = (out / "log.csv").read_text()
    changes = [ln for ln in log.splitlines()[1:] if ln.split(",")[1] == "change"]
    assert len(changes) == 2 and changes[-1].split(",")[13] == "2"  # 1.5 + 0.5 mm
    assert len(list(out.glob("step-*"))) == 4
    assert "step 4" in r.stdout


def test_auto_refused_on_a_real_device(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "sounddevice", None)  # refused before any device
    code, _, err = run("tune", "--object", JAR, "--target", 250, "--auto", "--out", tmp_path)
    one_line_error(code, err, "--auto", "--device simulate")


# ----------------------------------------------------------------- take checks
def _sweep(rate: float = 48000.0) -> tuple[SweepParams, np.ndarray]:
    p = SweepParams(start_hz=50.0, stop_hz=4000.0, duration_s=1.0, rate_hz=rate,
                    level_dbfs=-20.0, tail_s=0.3)
    return p, make_sweep(p).samples


def _take(delay: int, lead: int = 9600, post: int = 9600, dead: int = 3584):
    """A bit-exact loopback take (shared/reference note): both channels the played
    signal delayed, the first `dead` samples zero."""
    p, x = _sweep()
    played = np.concatenate([np.zeros(lead), x, np.zeros(post)])
    rec = np.zeros((played.size, 2))
    rec[delay:, 0] = played[:played.size - delay] * 2.0
    rec[delay:, 1] = played[:played.size - delay]
    rec[:dead] = 0.0
    return p, played, rec, lead


def test_check_take_clean_loopback_gives_the_delay_exactly():
    for delay in (515, 1029, 1540, 16391):  # the latencies the note measured
        p, played, rec, lead = _take(delay, post=20000)
        c = check_take(rec, played, 48000.0, 1, 2, p, lead, [(0, "input underflow")])
        assert c.ok, c.problems
        assert c.delay_samples == delay
        assert c.peaks_dbfs[2] == pytest.approx(-20.0, abs=1e-6)


def test_check_take_finds_gaps_slips_silence_and_a_lost_start():
    p, played, rec, lead = _take(1029)
    mid = lead + 1029 + 24000
    for length in (751, 6132):  # the note's range of inserted zero runs
        g = np.concatenate([rec[:mid], np.zeros((length, 2)), rec[mid:]])[:rec.shape[0]]
        c = check_take(g, played, 48000.0, 1, 2, p, lead)
        assert any("gap" in x for x in c.problems), c.problems
    # samples dropped (no zeros): the second half arrives early
    s = np.concatenate([rec[:mid], rec[mid + 800:], np.zeros((800, 2))])
    c = check_take(s, played, 48000.0, 1, 2, p, lead)
    assert any("slip" in x for x in c.problems), c.problems
    # an all-zero take (a rate the device does not run at)
    c = check_take(np.zeros_like(rec), played, 48000.0, 1, 2, p, lead)
    assert c.problems and "all zeros" in c.problems[0]
    # the dead start reaching into the sweep: lost start, longer lead-in asked
    p2, played2, rec2, lead2 = _take(1029, lead=1000, dead=3584)
    c = check_take(rec2, played2, 48000.0, 1, 2, p2, lead2)
    assert c.retry == "lead-in"
    # a dropout the stream flagged inside the sweep
    c = check_take(rec, played, 48000.0, 1, 2, p, lead, [(mid, "output underflow")])
    assert any("output underflow" in x for x in c.problems)
    # clipping
    c = check_take(np.clip(rec * 20, -1, 1), played, 48000.0, 1, 2, p, lead)
    assert c.clipped == (1, 2)


def test_find_delay_against_scipy_correlate():
    """The envelope cross-correlation's lag equals scipy.signal.correlate's peak on a
    noise signal (a sharp autocorrelation, so both must agree exactly)."""
    from scipy.signal import correlate

    rng = np.random.default_rng(7)
    x = rng.standard_normal(4000)
    y = np.concatenate([np.zeros(1234), x, np.zeros(500)]) + 0.01 * rng.standard_normal(5734)
    lag, match = find_delay(x, y)
    c = correlate(y, x, mode="full")
    assert lag == int(np.argmax(np.abs(c))) - (x.size - 1) == 1234
    assert match > 0.99


# ----------------------------------------------------------------- parsing, files
def test_object_toml_round_trips_every_example_object(tmp_path):
    for path in sorted(EX.glob("*.toml")):
        if path.name.startswith("sweep") or "tube" in path.read_text().split("\n")[1:3]:
            continue
        obj = load_object(path)
        if obj.kind != "helmholtz":
            continue
        out = tmp_path / path.name
        out.write_text(object_toml(obj.to_file_data()))
        again = load_object(out)
        assert again.cavity.volume_m3 == pytest.approx(obj.cavity.volume_m3, rel=1e-12)
        assert again.neck == obj.neck


def test_parse_change_and_tolerance():
    assert parse_change("1.5 mm", "neck") == pytest.approx(1.5e-3)
    assert parse_change("1.5", "neck") == pytest.approx(1.5e-3)
    assert parse_change("20 mL", "volume") == pytest.approx(20e-6)
    assert parse_change("-0.2 mm", "diameter") == pytest.approx(-0.2e-3)
    with pytest.raises(InputError):
        parse_change("20 mL", "neck")
    # 1200 log2(1 + tol/f) = 5 cents (the cent's definition)
    assert cents(250 + parse_tolerance("5 cents", 250), 250) == pytest.approx(5.0)
    assert parse_tolerance("0.5 Hz", 250) == 0.5
    assert parse_tolerance("0.2 %", 250) == pytest.approx(0.5)
    with pytest.raises(InputError):
        parse_tolerance("five", 250)


def test_parse_simulate():
    assert parse_simulate("simulate") == {}
    assert parse_simulate("simulate:end_correction=1.2,dropouts=0") == {
        "end_correction_factor": 1.2, "dropout_probability": 0.0}
    assert parse_simulate("pulse") is None
    with pytest.raises(InputError):
        parse_simulate("simulate:colour=red")


# ----------------------------------------------------------------- bad input
@pytest.mark.parametrize("args,needles", [
    (["--inside", "2", "--outside", "2"], ["--inside/--outside", "different"]),
    (["--level", "-6"], ["--level", "--max-level"]),
    (["--max-level", "3"], ["--max-level"]),
    (["--inside", "3"], ["input channel", "3 are needed"]),
    (["--rate", "12345"], ["--rate", "48000"]),
    (["--output", "3"], ["output channels"]),
    (["--device", "simulate:q=-1"], ["q"]),
    (["--repeats", "0"], ["--repeats"]),
])
def test_bad_input_is_one_line_exit_2(tmp_path, args, needles):
    code, _, err = run("measure", "--object", JAR, "--device", "simulate", "--out",
                       tmp_path / "x", *args)
    one_line_error(code, err, *needles)
    assert not (tmp_path / "x").exists() or not any((tmp_path / "x").glob("*.flac"))


def test_no_portaudio_says_how_to_install(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "sounddevice", None)
    code, _, err = run("devices")
    one_line_error(code, err, "libportaudio2")
    code, _, err = run("measure", "--object", JAR, "--device", "3", "--out", tmp_path / "x")
    one_line_error(code, err, "libportaudio2", "--device simulate")


def test_no_such_device_and_too_few_inputs(monkeypatch, tmp_path):
    """A fake sounddevice module with two devices: a name that matches none, a
    number out of range, and a device with one input are refused in one line."""
    import types

    fake = types.ModuleType("sounddevice")
    fake.query_hostapis = lambda: [{"name": "ALSA"}]
    fake.query_devices = lambda: [
        {"name": "USB duo", "hostapi": 0, "max_input_channels": 2, "max_output_channels": 2,
         "default_samplerate": 48000.0},
        {"name": "laptop mic", "hostapi": 0, "max_input_channels": 1,
         "max_output_channels": 2, "default_samplerate": 44100.0}]
    fake.default = types.SimpleNamespace(device=(0, 0))
    monkeypatch.setitem(sys.modules, "sounddevice", fake)
    code, out, _ = run("devices")
    assert code == 0 and "USB duo" in out and "laptop mic" in out
    for spec, needle in (("nothing-like-it", "no device named"), ("7", "no device number 7"),
                         ("laptop", "1 input channel")):
        code, _, err = run("measure", "--object", JAR, "--device", spec, "--out",
                           tmp_path / spec)
        one_line_error(code, err, needle)

    class PortAudioError(Exception):
        pass

    def check_settings(device=None, channels=None, samplerate=None, dtype=None):
        if samplerate != 48000.0:
            raise PortAudioError("Invalid sample rate [PaErrorCode -9997]")

    def busy_stream(**kw):
        raise PortAudioError("Error opening Stream: Device unavailable [PaErrorCode -9985]")

    fake.PortAudioError = PortAudioError
    fake.check_input_settings = fake.check_output_settings = check_settings
    fake.Stream = busy_stream
    code, _, err = run("measure", "--object", JAR, "--device", "USB", "--rate", "44100",
                       "--out", tmp_path / "rate")
    one_line_error(code, err, "--rate", "44100", "--rate 48000")
    code, _, err = run("measure", "--object", JAR, "--device", "USB", "--out", tmp_path / "busy")
    one_line_error(code, err, "busy", "close the other program")


def test_importing_the_cli_loads_no_portaudio():
    import subprocess

    code = ("import characterize.cli, sys; "
            "print('sounddevice' in sys.modules, 'numpy' in sys.modules)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=60)
    assert proc.stdout.split() == ["False", "False"], proc.stdout + proc.stderr


def test_tolerance_band_in_cents_matches_definition():
    # 100 cents is one equal-tempered semitone: 2**(1/12) (common practice)
    assert cents(440.0 * 2 ** (1 / 12), 440.0) == pytest.approx(100.0)
    assert math.isclose(cents(880.0, 440.0), 1200.0)

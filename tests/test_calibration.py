"""Tests for characterize.calibration and the calibrate command."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import soundfile as sf
from click.testing import CliRunner

from characterize.calibration import (
    Calibration,
    ChannelCalibration,
    RelativeCalibration,
    analyze_tone,
    read_calibration,
    relative_from_swap,
    sensitivity_from_tone,
    write_calibration,
)
from characterize.cli import main
from characterize.errors import InputError
from characterize.physics.spl import spl_to_pressure_pa


def _tone(rate=48000, seconds=3.0, freq=1000.0, rms_dbfs=-26.0, noise=1e-4, seed=0):
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * rate)) / rate
    amp = math.sqrt(2) * 10 ** (rms_dbfs / 20)
    return amp * np.sin(2 * np.pi * freq * t + rng.uniform(0, 6)) + noise * rng.standard_normal(
        t.size)


class TestLevels:
    def test_reference_levels(self):
        # physics sheet section 10: 94 dB = 1.00237 Pa rms, 114 dB = 10.0237 Pa rms
        assert spl_to_pressure_pa(94.0) == pytest.approx(1.00237, abs=1e-5)
        assert spl_to_pressure_pa(114.0) == pytest.approx(10.0237, abs=1e-4)

    def test_sheet_check(self):
        # physics sheet section 10: a -26 dBFS rms tone for 94 dB gives K = 0.0500 FS/Pa,
        # and a -40 dBFS rms signal then reads 80.00 dB SPL
        k = sensitivity_from_tone(_tone(), 48000.0, 94.0)
        assert k == pytest.approx(0.0500, abs=5e-5)
        x_rms = 10 ** (-40 / 20)
        assert 20 * math.log10(x_rms / k / 20e-6) == pytest.approx(80.00, abs=0.01)

    @pytest.mark.parametrize("seed", range(10))
    def test_family_maps_to_the_stated_level(self, seed):
        # synthetic calibrator tones (250 Hz or 1 kHz, 94 or 114 dB, several rates,
        # noise 35 to 60 dB down, a silent lead-in and a removal click) map to the level
        rng = np.random.default_rng(seed)
        rate = float(rng.choice([44100, 48000, 96000]))
        freq = float(rng.choice([250.0, 1000.0]))
        level = float(rng.choice([94.0, 114.0]))
        dbfs = rng.uniform(-40, -8)
        noise = 10 ** ((dbfs - rng.uniform(35, 60)) / 20)
        x = np.concatenate([noise * rng.standard_normal(int(0.5 * rate)),
                            _tone(rate, rng.uniform(1.5, 4), freq, dbfs, noise, seed),
                            0.3 * rng.standard_normal(int(0.05 * rate)) * 10 ** (dbfs / 20)])
        reading = analyze_tone(x, rate)
        assert reading.frequency_hz == pytest.approx(freq, rel=1e-4)
        k = sensitivity_from_tone(x, rate, level)
        # the level read back through K: within 0.02 dB
        p_rms = reading.rms_fs / k
        assert 20 * math.log10(p_rms / 20e-6) == pytest.approx(level, abs=0.02)
        assert 20 * math.log10(reading.rms_fs) == pytest.approx(dbfs, abs=0.02)


class TestNoStableTone:
    @pytest.mark.parametrize("case", ["noise", "short", "wandering", "silent", "clipped",
                                      "two-tones"])
    def test_one_line_error(self, case):
        rate = 48000
        rng = np.random.default_rng(3)
        t = np.arange(3 * rate) / rate
        x = {
            "noise": 0.1 * rng.standard_normal(t.size),
            "short": _tone(rate, 0.6),
            "wandering": (0.1 * (1 + 0.5 * np.sin(2 * np.pi * 0.8 * t))
                          * np.sin(2 * np.pi * 1e3 * t)),
            "silent": np.zeros(t.size),
            "clipped": np.clip(1.5 * np.sin(2 * np.pi * 1e3 * t), -1, 1),
            "two-tones": 0.1 * np.sin(2 * np.pi * 1e3 * t) + 0.08 * np.sin(2 * np.pi * 1370 * t),
        }[case]
        with pytest.raises(InputError) as info:
            sensitivity_from_tone(x, rate, source="cal.wav", field_name="--channel 1")
        assert "\n" not in str(info.value)
        assert str(info.value).startswith("cal.wav: --channel 1:")
        assert re.search(r"no stable tone|clipped", str(info.value))


class TestSwap:
    def test_sheet_check(self):
        # physics sheet section 10: H = 10 at -90 deg, mismatch 1.05 at 3 deg gives
        # H_I = 10.500 at -87.0 deg and H_II = 9.524 at -93.0 deg; both are recovered
        h = 10 * np.exp(-1j * np.pi / 2)
        m = 1.05 * np.exp(1j * np.radians(3))
        h_i, h_ii = h * m, h / m
        assert abs(h_i) == pytest.approx(10.500, abs=1e-3)
        assert np.degrees(np.angle(h_ii)) == pytest.approx(-93.0, abs=1e-6)
        got_h, got_m = relative_from_swap(np.array([h_i]), np.array([h_ii]))
        assert got_h[0] == pytest.approx(h, rel=1e-12)
        assert got_m[0] == pytest.approx(m, rel=1e-12)

    @pytest.mark.parametrize("seed", range(5))
    def test_frequency_dependent_family(self, seed):
        # ISO 10534-2 switching: any H (phase wrapping many times, from the resonance
        # and a delay) and any smooth mismatch are recovered
        rng = np.random.default_rng(seed)
        f = np.linspace(20, 3000, 2000)
        f0, q, tau = rng.uniform(80, 600), rng.uniform(5, 80), rng.uniform(0, 2e-3)
        h = np.exp(-2j * np.pi * f * tau) / (1 - (f / f0) ** 2 + 1j * f / (q * f0))
        m = (1 + 0.1 * rng.standard_normal()) * np.exp(1j * np.radians(5 * np.tanh(f / 500)))
        got_h, got_m = relative_from_swap(h * m, h / m)
        assert np.allclose(got_h, h, rtol=1e-9)
        assert np.allclose(got_m, m, rtol=1e-9)

    def test_correction_direction(self):
        rel = RelativeCalibration(1, 2, (100.0, 1000.0), (1.1, 1.1), (2.0, 2.0))
        f = np.array([300.0])
        assert rel.correction(f, 1, 2)[0] == pytest.approx(1.1 * np.exp(1j * np.radians(2)))
        assert rel.correction(f, 2, 1)[0] == pytest.approx(1 / (1.1 * np.exp(1j * np.radians(2))))
        with pytest.raises(InputError, match="channels 1 and 2"):
            rel.correction(f, 3, 1)


class TestFile:
    def test_round_trip(self, tmp_path):
        cal = Calibration({1: ChannelCalibration(1, 0.05, 94.0, 1000.0, "a.wav"),
                           3: ChannelCalibration(3, 0.0123, 114.0, 250.0, 'b "x".wav')},
                          RelativeCalibration(1, 3, (50.0, 500.0, 2000.0), (1.0, 1.02, 1.05),
                                              (0.0, -1.5, 3.0), ("i.flac", "ii.flac")))
        path = write_calibration(tmp_path / "mics.toml", cal)
        back = read_calibration(path)
        assert back.channels == cal.channels
        assert back.relative == cal.relative
        assert back.sensitivity(3) == 0.0123
        with pytest.raises(InputError, match="exists"):
            write_calibration(path, cal)
        with pytest.raises(InputError, match=r"channels\.2: no sensitivity for channel 2"):
            back.sensitivity(2)

    @pytest.mark.parametrize(("text", "field"), [
        ('schema = "other/1"\n', "schema"),
        ('schema = "characterize.calibration/1"\n[channels.1]\nlevel_db = 94.0\ntone_hz = 1e3\n',
         r"channels\.1\.sensitivity_fs_per_pa"),
        ('schema = "characterize.calibration/1"\n[channels.1]\nsensitivity_fs_per_pa = -1.0\n'
         'level_db = 94.0\ntone_hz = 1e3\n', r"channels\.1\.sensitivity_fs_per_pa"),
        ('schema = "characterize.calibration/1"\ncolour = 1\n', "colour"),
        ('schema = "characterize.calibration/1"\n[relative]\nchannel_a = 1\nchannel_b = 2\n'
         'freqs_hz = [2.0, 1.0]\nratio_magnitude = [1.0, 1.0]\nratio_phase_deg = [0.0, 0.0]\n',
         r"relative\.freqs_hz"),
        ("not toml [", None),
    ])
    def test_bad_files(self, tmp_path, text, field):
        path = tmp_path / "bad.toml"
        path.write_text(text, encoding="utf-8")
        with pytest.raises(InputError) as info:
            read_calibration(path)
        msg = str(info.value)
        assert "\n" not in msg and msg.startswith(str(path))
        if field:
            assert re.search(field, msg)


class TestCommand:
    def _run(self, *args):
        return CliRunner().invoke(main, ["calibrate", *map(str, args)])

    def test_tone_to_file_and_merge(self, tmp_path):
        rec = tmp_path / "cal.wav"
        x = _tone()
        sf.write(rec, np.stack([x, 0.5 * x], axis=1), 48000, subtype="PCM_24")
        out = tmp_path / "mics"  # --out is a folder: mics/calibration.toml
        res = self._run(rec, "--channel", 1, "--out", out)
        assert res.exit_code == 0, res.output
        assert "hearing" in res.stderr
        res = self._run(rec, "--channel", 2, "--level", 94, "--out", out, "--merge")
        assert res.exit_code == 0, res.output
        cal = read_calibration(out)
        assert cal.sensitivity(1) == pytest.approx(0.05, rel=1e-3)
        assert cal.sensitivity(2) == pytest.approx(0.025, rel=1e-3)
        res = self._run(rec, "--channel", 1, "--out", out)
        assert res.exit_code == 2 and "--force" in res.stderr

    def test_no_tone_is_exit_2_one_line(self, tmp_path):
        rec = tmp_path / "noise.wav"
        sf.write(rec, 0.1 * np.random.default_rng(0).standard_normal((48000 * 2, 2)), 48000)
        out = tmp_path / "mics"
        res = self._run(rec, "--channel", 1, "--out", out)
        assert res.exit_code == 2
        assert len(res.stderr.strip().splitlines()) == 1
        assert "no stable tone" in res.stderr
        assert not (out / "calibration.toml").exists()

    def test_needs_channel_or_swap(self, tmp_path):
        res = self._run(tmp_path / "x.wav", "--out", tmp_path / "m")
        assert res.exit_code == 2 and "--channel" in res.stderr

    def test_swap_recovers_mismatch(self, tmp_path):
        # two simulated runs of the same resonator with the microphones exchanged:
        # channel 1's chain has gain 1.1 relative to channel 2's
        from characterize.simulate import Setup, simulate, write_recording

        setup = Setup(f0_hz=300.0, q=20.0, excitation="noise", noise_duration_s=6.0,
                      gain_inside=1.0, gain_outside=1.0, delay_s=0.0, snr_db=50.0)
        data, _ = simulate(setup, seed=1)
        # configuration I: inside mic on channel 1 (gain 1.1), outside on channel 2
        rec_i = np.stack([1.1 * data[:, 0], data[:, 1]], axis=1) * 0.8
        # configuration II: the outside position is now on channel 1
        rec_ii = np.stack([1.1 * data[:, 1], data[:, 0]], axis=1) * 0.8
        p1, p2 = tmp_path / "i.wav", tmp_path / "ii.wav"
        write_recording(str(p1), rec_i, setup.rate_hz, "FLOAT")
        write_recording(str(p2), rec_ii, setup.rate_hz, "FLOAT")
        out = tmp_path / "mics"
        res = self._run(p1, "--swap", p2, "--out", out)
        assert res.exit_code == 0, res.stderr
        rel = read_calibration(out).relative
        assert rel is not None and (rel.channel_a, rel.channel_b) == (1, 2)
        f = np.asarray(rel.freqs_hz)
        band = (f > 150) & (f < 600)
        assert np.median(np.asarray(rel.ratio_magnitude)[band]) == pytest.approx(1.1, rel=0.01)
        assert abs(np.median(np.asarray(rel.ratio_phase_deg)[band])) < 1.0

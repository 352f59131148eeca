"""Tests for characterize.excitation: the exponential sweep, its inverse, sidecars.

Every expected value comes from outside the project: Farina 2000 for the sweep
law and the harmonic advance, scipy.signal (chirp, hilbert, butter, freqs) as
independent implementations, the physics sheet §7 check values, or common
practice (Hann fades, TOML round trips).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from characterize import excitation as ex
from characterize.errors import InputError
from characterize.excitation import (
    SweepParams,
    estimate_params,
    inverse_spectrum,
    make_sweep,
    read_sidecar,
    sidecar_text,
    usable_band,
    validate_params,
)

# Sweeps over which the law is checked. The analytic-signal estimate of the
# instantaneous frequency (scipy.signal.hilbert) is itself disturbed near the
# sweep's abrupt start; these sweeps give it enough cycles before the middle
# 90 % starts for the estimator error to stay well below 0.5 % (a 2 s sweep
# from 20 Hz only has ~1.4 cycles between the fade's end and the 5 % point,
# and there the Hilbert estimate alone is off by 0.7 %).
LAW_CASES = [
    dict(start_hz=20.0, stop_hz=20000.0, duration_s=10.0, rate_hz=48000.0, level_dbfs=-6.0),
    dict(start_hz=50.0, stop_hz=20000.0, duration_s=4.0, rate_hz=48000.0, level_dbfs=-6.0),
    dict(start_hz=100.0, stop_hz=10000.0, duration_s=1.0, rate_hz=44100.0, level_dbfs=-12.0),
    dict(start_hz=40.0, stop_hz=40000.0, duration_s=5.0, rate_hz=96000.0, level_dbfs=-3.0,
         fade_in_s=0.1, tail_s=2.0),
]


def _ids(cases: list[dict[str, float]]) -> list[str]:
    return [f"{c['start_hz']:g}-{c['stop_hz']:g}Hz-{c['duration_s']:g}s-{c['rate_hz']:g}"
            for c in cases]


def _n_sweep(p: SweepParams) -> int:
    return int(round(p.duration_s * p.rate_hz))


class TestSweepLaw:
    @pytest.mark.parametrize("kw", LAW_CASES, ids=_ids(LAW_CASES))
    def test_instantaneous_frequency_is_exponential(self, kw: dict[str, float]) -> None:
        p = SweepParams(**kw)
        x = make_sweep(p).samples
        n = _n_sweep(p)
        # instantaneous frequency from the analytic signal's phase (scipy.signal.hilbert)
        phase = np.unwrap(np.angle(signal.hilbert(x)))
        inst = np.diff(phase) * p.rate_hz / (2 * np.pi)
        t = (np.arange(inst.size) + 0.5) / p.rate_hz
        # Farina 2000: f(t) = f1 exp(t R / T), R = ln(f2/f1)
        law = p.start_hz * np.exp(t * math.log(p.stop_hz / p.start_hz) / p.duration_s)
        a, b = int(0.05 * n), int(0.95 * n)
        rel = inst[a:b] / law[a:b] - 1
        assert np.max(np.abs(rel)) < 0.005  # brief: 0.5 % over the middle 90 %

    @pytest.mark.parametrize("kw", LAW_CASES, ids=_ids(LAW_CASES))
    def test_samples_match_scipy_logarithmic_chirp(self, kw: dict[str, float]) -> None:
        p = SweepParams(**kw)
        x = make_sweep(p).samples
        n = _n_sweep(p)
        t = np.arange(n) / p.rate_hz
        # scipy.signal.chirp(method='logarithmic') returns cos(phase + phi) with the
        # same phase 2 pi f1 T/R (e^{tR/T} - 1) as Farina's sin(...): the known
        # constant is phi = -90 degrees (sin u = cos(u - 90 deg)).
        ref = signal.chirp(t, p.start_hz, p.duration_s, p.stop_hz, method="logarithmic", phi=-90)
        amp = 10 ** (p.level_dbfs / 20)
        n_in = int(round(p.fade_in_s * p.rate_hz))
        n_out = int(round(p.fade_out_s * p.rate_hz))
        mid = slice(n_in, n - n_out)
        assert np.max(np.abs(x[mid] / amp - ref[mid])) < 1e-6  # scipy.signal.chirp

    def test_phase_constant_is_minus_90_degrees(self) -> None:
        # the other conventions do not agree: phi = 0 (cosine) is far off
        p = SweepParams(**LAW_CASES[1])
        n = _n_sweep(p)
        t = np.arange(n) / p.rate_hz
        x = make_sweep(p).samples[:n] / 10 ** (p.level_dbfs / 20)
        n_in = int(round(p.fade_in_s * p.rate_hz))
        sl = slice(n_in, n // 2)
        errs = {phi: np.max(np.abs(x[sl] - signal.chirp(t, p.start_hz, p.duration_s, p.stop_hz,
                                                        method="logarithmic", phi=phi)[sl]))
                for phi in (0.0, -90.0, 90.0, 180.0)}
        assert min(errs, key=errs.__getitem__) == -90.0  # scipy.signal.chirp convention
        assert errs[0.0] > 0.5


class TestSweepShape:
    @pytest.mark.parametrize("fade_in_s, fade_out_s, tail_s",
                             [(0.05, 0.01, 1.0), (0.2, 0.1, 0.25), (0.0, 0.0, 0.0)])
    def test_fades_and_tail_lengths(self, fade_in_s: float, fade_out_s: float,
                                    tail_s: float) -> None:
        fs = 48000.0
        p = SweepParams(50.0, 5000.0, 1.5, fs, -6.0, fade_in_s=fade_in_s,
                        fade_out_s=fade_out_s, tail_s=tail_s)
        x = make_sweep(p).samples
        n = _n_sweep(p)
        n_in, n_out, n_tail = (int(round(v * fs)) for v in (fade_in_s, fade_out_s, tail_s))
        assert x.size == n + n_tail
        assert np.all(x[n:] == 0.0)  # the tail is digital silence
        t = np.arange(n) / fs
        carrier = 10 ** (p.level_dbfs / 20) * signal.chirp(
            t, p.start_hz, p.duration_s, p.stop_hz, method="logarithmic", phi=-90)
        ok = np.abs(carrier) > 0.2  # where the envelope can be read as a ratio
        env = np.where(ok, x[:n] / np.where(ok, carrier, 1.0), np.nan)
        k = np.arange(n)
        # half-Hann fades (common practice): 0.5 (1 - cos(pi k / n_in)) rising ...
        expect = np.ones(n)
        if n_in:
            expect[:n_in] = 0.5 * (1 - np.cos(np.pi * k[:n_in] / n_in))
        if n_out:
            expect[n - n_out:] = 0.5 * (1 + np.cos(np.pi * (k[:n_out] + 1) / n_out))
        assert np.nanmax(np.abs(env - expect)) < 1e-6
        # the fades have the stated lengths: the envelope is 1 exactly outside them
        below = np.flatnonzero(ok & (np.abs(env - 1) > 1e-9))
        if n_in:
            assert below[below < n // 2].max() < n_in
            assert below[below < n // 2].max() > n_in - 0.02 * fs
        else:
            assert not np.any(below < n // 2)
        if n_out:
            assert below[below > n // 2].min() >= n - n_out
            assert x[n - 1] == pytest.approx(0.0, abs=1e-12)  # ends at zero: no click
        else:
            assert not np.any(below > n // 2)

    @pytest.mark.parametrize("level_dbfs", [0.0, -6.0, -20.0, -40.0])
    def test_peak_level(self, level_dbfs: float) -> None:
        p = SweepParams(30.0, 3000.0, 1.0, 44100.0, level_dbfs)
        x = make_sweep(p).samples
        # peak = 10**(dBFS/20) of full scale 1 (common practice). Sampled crests
        # fall short of the true one by at most 1 - cos(pi f / fs): 2.3e-6 at the
        # 30 Hz start, so the sampled peak is within 1e-4.
        assert np.max(np.abs(x)) == pytest.approx(10 ** (level_dbfs / 20), rel=1e-4)
        assert np.max(np.abs(x)) <= 10 ** (level_dbfs / 20)


INVERSE_PARAMS = SweepParams(20.0, 20000.0, 2.0, 48000.0, -6.0, tail_s=0.5)


@pytest.fixture(scope="module")
def deconvolved() -> tuple[SweepParams, np.ndarray, np.ndarray]:
    """The sweep deconvolved by its own inverse, with the rfft frequency grid."""
    p = INVERSE_PARAMS
    sw = make_sweep(p)
    n_fft = 2 * sw.samples.size
    d = np.fft.irfft(np.fft.rfft(sw.samples, n_fft) * inverse_spectrum(sw, n_fft), n_fft)
    return p, d, np.fft.rfftfreq(n_fft, 1 / p.rate_hz)


class TestInverse:
    @staticmethod
    def _butterworth(f: np.ndarray, lo: float, hi: float) -> np.ndarray:
        """Analog Butterworth high-pass x low-pass of the design's order from
        scipy.signal.butter (zeros-poles-gain form, exact at high order)
        evaluated with scipy.signal.freqs_zpk."""
        from characterize.excitation import BAND_ORDER

        zh, ph, kh = signal.butter(BAND_ORDER, 2 * np.pi * lo, "highpass", analog=True,
                                   output="zpk")
        zl, pl, kl = signal.butter(BAND_ORDER, 2 * np.pi * hi, "lowpass", analog=True,
                                   output="zpk")
        _, hh = signal.freqs_zpk(zh, ph, kh, 2 * np.pi * f)
        _, hl = signal.freqs_zpk(zl, pl, kl, 2 * np.pi * f)
        return hh * hl

    def test_impulse_peak_at_zero_within_group_delay(self, deconvolved) -> None:
        p, d, _ = deconvolved
        lo, hi = usable_band(p)
        # group delay of the causal band limit at 1 kHz, measured from
        # scipy.signal.freqs phase: 3.9 samples at 48 kHz
        w = 2 * np.pi * np.array([999.5, 1000.5])
        ph = np.unwrap(np.angle(self._butterworth(w / (2 * np.pi), lo, hi)))
        gd_samples = -(ph[1] - ph[0]) / (w[1] - w[0]) * p.rate_hz
        assert 0.0 < gd_samples < 20.0  # a causal filter delays; sanity range
        i_peak = int(np.argmax(np.abs(d)))
        assert 0 <= i_peak <= math.ceil(gd_samples) + 1
        # causal: almost no energy at negative lags (second half of the circular
        # buffer). The Nyquist cut of the analog low-pass leaves 0.7 % of the peak
        # at lag -1; in energy that is below 1e-4 of the total.
        e = d**2
        assert e[d.size // 2:].sum() / e.sum() < 1e-3

    def test_spectrum_is_the_butterworth_band_limit(self, deconvolved) -> None:
        p, d, f = deconvolved
        lo, hi = usable_band(p)
        spec = np.fft.rfft(d)
        ref = self._butterworth(f, lo, hi)
        sel = (f >= lo) & (f <= hi)
        err_db = 20 * np.log10(np.abs(spec[sel]) / np.abs(ref[sel]))
        assert np.max(np.abs(err_db)) < 0.01  # scipy.signal.butter + freqs
        assert np.max(np.abs(np.angle(spec[sel] / ref[sel]))) < 1e-3

    def test_spectrum_flat_inside_band(self, deconvolved) -> None:
        p, d, f = deconvolved
        lo, hi = usable_band(p)
        spec = np.abs(np.fft.rfft(d))
        # Butterworth is maximally flat: |H|^2 = 1/(1 + (fc/f)^2n) (textbook), i.e.
        # 0.065 dB at 1.3 corners for n = 8 and less for higher orders, so +-0.1 dB
        # holds from 1.3 lo to hi / 1.3 ...
        inner = (f >= 1.3 * lo) & (f <= hi / 1.3)
        mag_db = np.full(f.size, np.nan)
        nonzero = spec > 0  # the inverse is exactly zero outside the sweep's band
        mag_db[nonzero] = 20 * np.log10(spec[nonzero])
        assert np.max(np.abs(mag_db[inner])) < 0.1
        # ... but usable_band's ends are the band limit's -3 dB corners themselves
        # (Butterworth corner: -3.01 dB per filter), so the band is not flat to
        # 0.1 dB all the way to its ends.
        i_lo = int(np.argmin(np.abs(f - lo)))
        from characterize.excitation import BAND_ORDER

        corner_db = -10 * np.log10(1 + (lo / f[i_lo]) ** (2 * BAND_ORDER))  # |H|^2 = 1/(1 + (fc/f)^2n)
        # the nearest bin is not exactly on the corner, and the filter is steep there
        assert corner_db == pytest.approx(-3.01, abs=0.4)
        assert mag_db[i_lo] == pytest.approx(corner_db, abs=0.01)

    def test_harmonic_images_arrive_early_by_the_advance(self) -> None:
        # Farina 2000; physics sheet §7 checks the advance "by simulating
        # x + 0.3x^2 + 0.2x^3". The distortion is made at 4x the rate and
        # decimated with scipy.signal.resample_poly (anti-aliased, like an ADC).
        p = SweepParams(20.0, 20000.0, 2.0, 48000.0, -6.0)
        sw = make_sweep(p)
        x = sw.samples
        xu = signal.resample_poly(x, 4, 1)
        y = signal.resample_poly(xu + 0.3 * xu**2 + 0.2 * xu**3, 1, 4)[: x.size]
        n_fft = 2 * x.size
        d = np.fft.irfft(np.fft.rfft(y, n_fft) * inverse_spectrum(sw, n_fft), n_fft)
        env = np.abs(signal.hilbert(d))
        for order in (2, 3):
            adv = p.duration_s * math.log(order) / math.log(p.stop_hz / p.start_hz)  # Farina 2000
            c = n_fft - int(round(adv * p.rate_hz))
            win = np.arange(c - int(0.05 * p.rate_hz), c + int(0.05 * p.rate_hz))
            t_peak = (n_fft - win[np.argmax(env[win])]) / p.rate_hz
            assert t_peak == pytest.approx(adv, abs=1e-3)


class TestHarmonicAdvance:
    def test_physics_sheet_check(self) -> None:
        p = SweepParams(20.0, 20000.0, 10.0, 48000.0, -6.0)
        assert p.harmonic_advance_s(2) == pytest.approx(1.0034, abs=6e-5)  # physics sheet §7
        assert p.harmonic_advance_s(3) == pytest.approx(1.5904, abs=6e-5)  # physics sheet §7

    def test_first_order_has_no_advance(self) -> None:
        # ln 1 = 0 (Farina 2000: the linear response is the reference)
        assert SweepParams(20.0, 20000.0, 10.0, 48000.0, -6.0).harmonic_advance_s(1) == 0.0


ESTIMATE_CASES = [
    dict(start_hz=20.0, stop_hz=20000.0, duration_s=10.0, rate_hz=48000.0, level_dbfs=-6.0),
    dict(start_hz=50.0, stop_hz=8000.0, duration_s=3.0, rate_hz=44100.0, level_dbfs=-12.0,
         tail_s=0.5),
    dict(start_hz=32.0, stop_hz=2048.0, duration_s=2.0, rate_hz=48000.0, level_dbfs=-6.0,
         tail_s=0.7),  # simulate.default_sweep's shape: f0/8 .. 8 f0
    # realistic 2 s full-band sweep with the default fades
    dict(start_hz=20.0, stop_hz=20000.0, duration_s=2.0, rate_hz=48000.0, level_dbfs=-6.0),
    dict(start_hz=100.0, stop_hz=10000.0, duration_s=1.0, rate_hz=44100.0, level_dbfs=-20.0,
         tail_s=0.3),
]


def _in_small_blocks(x: np.ndarray, rate_hz: float, monkeypatch: pytest.MonkeyPatch
                     ) -> SweepParams:
    """estimate_params with blocks of 2^14 samples and at most 2^12 fitted points."""
    monkeypatch.setattr(ex, "ESTIMATE_BLOCK", 1 << 14)
    monkeypatch.setattr(ex, "ESTIMATE_MARGIN", 1 << 11)
    monkeypatch.setattr(ex, "ESTIMATE_MAX_POINTS", 1 << 12)
    return estimate_params(x, rate_hz)


class TestEstimateParams:
    @pytest.mark.parametrize("kw", ESTIMATE_CASES, ids=_ids(ESTIMATE_CASES))
    def test_recovers_band_and_duration(self, kw: dict[str, float]) -> None:
        p = SweepParams(**kw)
        est = estimate_params(make_sweep(p).samples, p.rate_hz)
        assert est.start_hz == pytest.approx(p.start_hz, rel=0.03)  # brief: 3 %
        assert est.stop_hz == pytest.approx(p.stop_hz, rel=0.03)
        assert est.duration_s == pytest.approx(p.duration_s, rel=0.02)  # brief: 2 %
        assert est.level_dbfs == pytest.approx(p.level_dbfs, abs=0.05)  # peak = 10**(dBFS/20)
        assert est.rate_hz == p.rate_hz

    @pytest.mark.parametrize("kw", ESTIMATE_CASES, ids=_ids(ESTIMATE_CASES))
    def test_block_by_block_reads_the_same(self, kw: dict[str, float],
                                           monkeypatch: pytest.MonkeyPatch) -> None:
        """Long sweeps are read in blocks of the analytic signal, with a
        decimated line fit; forced here on short ones (blocks of 2^14 samples,
        at most 2^12 points in the fit), the result is the one-block reading to
        well inside the brief's 2-3 % (the reference: one scipy.signal.hilbert
        of the whole stretch)."""
        p = SweepParams(**kw)
        x = make_sweep(p).samples.astype(np.float32)  # as load_sweep holds a file's samples
        whole = estimate_params(x, p.rate_hz)
        blocks = _in_small_blocks(x, p.rate_hz, monkeypatch)
        assert blocks.start_hz == pytest.approx(whole.start_hz, rel=2e-3)
        assert blocks.stop_hz == pytest.approx(whole.stop_hz, rel=2e-3)
        assert blocks.duration_s == pytest.approx(whole.duration_s, abs=2 / p.rate_hz)
        assert blocks.tail_s == pytest.approx(whole.tail_s, abs=2 / p.rate_hz)
        assert blocks.level_dbfs == whole.level_dbfs

    @pytest.mark.parametrize("lead_s, noise", [(0.5, 0.0), (2.0, 0.0), (0.5, 1e-4)])
    def test_block_by_block_with_leading_silence(self, lead_s: float, noise: float,
                                                 monkeypatch: pytest.MonkeyPatch) -> None:
        """A sweep file with silence (or faint noise) before the sweep: no block's
        transform may wrap the sweep onto that silence (the first block is cut
        mid-sweep), so the blocks find the same active part and law."""
        p = SweepParams(start_hz=50.0, stop_hz=8000.0, duration_s=5.0, rate_hz=16000.0,
                        level_dbfs=-6.0, tail_s=0.5)
        rng = np.random.default_rng(7)
        x = np.concatenate([np.zeros(int(lead_s * p.rate_hz)), make_sweep(p).samples])
        x = (x + noise * rng.standard_normal(x.size)).astype(np.float32)
        whole = estimate_params(x, p.rate_hz)
        blocks = _in_small_blocks(x, p.rate_hz, monkeypatch)
        assert blocks.start_hz == pytest.approx(whole.start_hz, rel=1e-3)
        assert blocks.stop_hz == pytest.approx(whole.stop_hz, rel=1e-3)
        assert blocks.duration_s == pytest.approx(whole.duration_s, abs=2 / p.rate_hz)
        # and both read the generated sweep (brief: 3 % band, 2 % duration)
        assert blocks.start_hz == pytest.approx(p.start_hz, rel=0.03)
        assert blocks.duration_s == pytest.approx(p.duration_s, rel=0.02)

    def test_silence_is_rejected(self) -> None:
        with pytest.raises(InputError, match="silent"):
            estimate_params(np.zeros(48000), 48000.0)

    def test_noise_is_not_a_sweep(self) -> None:
        x = np.random.default_rng(3).standard_normal(48000) * 0.1
        with pytest.raises(InputError, match="sweep"):
            estimate_params(x, 48000.0)


class TestSidecar:
    @pytest.mark.parametrize("params", [
        SweepParams(20.0, 20000.0, 10.0, 48000.0, -6.0),
        SweepParams(1 / 3, 12345.678901234, 7.000000000001, 96000.0, -0.1 - 0.2,
                    fade_in_s=0.0, fade_out_s=0.125, tail_s=2.5),
        SweepParams(50, 8000, 3, 44100, -12),  # integers survive as numbers
    ])
    def test_round_trip(self, tmp_path, params: SweepParams) -> None:
        path = tmp_path / "sweep.toml"
        path.write_text(sidecar_text(params), encoding="utf-8")
        back = read_sidecar(path)
        # a TOML write -> read round trip is exact (common practice; tomllib parses)
        assert back == params
        assert all(isinstance(v, float) for k, v in back.to_dict().items() if k != "kind")

    def test_missing_field_is_named(self, tmp_path) -> None:
        text = sidecar_text(SweepParams(20.0, 20000.0, 10.0, 48000.0, -6.0))
        path = tmp_path / "s.toml"
        path.write_text("\n".join(l for l in text.splitlines() if not l.startswith("tail_s")),
                        encoding="utf-8")
        with pytest.raises(InputError, match="sweep.tail_s"):
            read_sidecar(path)

    def test_sidecar_values_are_validated(self, tmp_path) -> None:
        path = tmp_path / "s.toml"
        path.write_text(sidecar_text(SweepParams(20.0, 30000.0, 10.0, 48000.0, -6.0)),
                        encoding="utf-8")
        with pytest.raises(InputError, match="Nyquist"):
            read_sidecar(path)


class TestValidate:
    def test_stop_above_nyquist(self) -> None:
        with pytest.raises(InputError, match="Nyquist"):
            validate_params(SweepParams(20.0, 24001.0, 1.0, 48000.0, -6.0))
        validate_params(SweepParams(20.0, 24000.0, 1.0, 48000.0, -6.0))  # at Nyquist is allowed

    @pytest.mark.parametrize("start, stop", [(1000.0, 1000.0), (2000.0, 1000.0), (0.0, 100.0)])
    def test_start_not_below_stop(self, start: float, stop: float) -> None:
        with pytest.raises(InputError, match="start < stop"):
            validate_params(SweepParams(start, stop, 1.0, 48000.0, -6.0))

    def test_level_above_full_scale(self) -> None:
        with pytest.raises(InputError, match="dBFS"):
            validate_params(SweepParams(20.0, 2000.0, 1.0, 48000.0, 0.5))
        validate_params(SweepParams(20.0, 2000.0, 1.0, 48000.0, 0.0))  # full scale is allowed

    def test_make_sweep_validates(self) -> None:
        with pytest.raises(InputError, match="Nyquist"):
            make_sweep(SweepParams(20.0, 30000.0, 1.0, 48000.0, -6.0))

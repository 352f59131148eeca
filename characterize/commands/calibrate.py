"""``characterize calibrate``: channel sensitivity from a calibrator tone, or the
relative gain and phase of the two channels from a microphone swap.

    characterize calibrate tone.wav --channel 1 --level 94 --out mics.toml
    characterize calibrate run-a.flac --swap run-b.flac --sweep sweep.wav --out mics.toml --merge

The calibration file is read by ``characterize fit --calibration FILE``.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import click

from ._errors import handles_errors
from ._params import Level

#: Points of the stored relative calibration (log-spaced band averages).
RELATIVE_POINTS = 200


def _relative(recording: Path, swapped: Path, sweep: Path | None, inside: int, outside: int
              ) -> Any:
    """RelativeCalibration from configuration I (``recording``) and II (``swapped``)."""
    import numpy as np

    from ..audio import check_channel, read_audio
    from ..calibration import RelativeCalibration, relative_from_swap
    from ..errors import InputError
    from ..transfer import cross_spectral_transfer, sweep_transfer

    rec_i = read_audio(recording, min_channels=2)
    rec_ii = read_audio(swapped, min_channels=2)
    for rec in (rec_i, rec_ii):
        check_channel(rec, inside, "--inside")
        check_channel(rec, outside, "--outside")
    if inside == outside:
        raise InputError("--inside/--outside", None, "must be different channels")
    if rec_i.rate_hz != rec_ii.rate_hz:
        raise InputError(str(swapped), None, f"sample rate {rec_ii.rate_hz:g} Hz differs "
                         f"from {recording}'s {rec_i.rate_hz:g} Hz")
    fs = rec_i.rate_hz
    if sweep is not None:
        from ..excitation import load_sweep

        sw = load_sweep(sweep, fs)
        tf_i = sweep_transfer(rec_i.channel(inside), rec_i.channel(outside), fs, sw)
        # configuration II: the microphones are exchanged, each on its own channel,
        # so the inside position is now on the outside channel
        tf_ii = sweep_transfer(rec_ii.channel(outside), rec_ii.channel(inside), fs, sw)
    else:
        tf_i = cross_spectral_transfer(rec_i.channel(inside), rec_i.channel(outside), fs)
        tf_ii = cross_spectral_transfer(rec_ii.channel(outside), rec_ii.channel(inside), fs)
    f = tf_i.freqs_hz
    h_ii = np.interp(f, tf_ii.freqs_hz, tf_ii.h.real) + 1j * np.interp(f, tf_ii.freqs_hz,
                                                                        tf_ii.h.imag)
    lo = max(tf_i.excited_band_hz[0], tf_ii.excited_band_hz[0])
    hi = min(tf_i.excited_band_hz[1], tf_ii.excited_band_hz[1])
    sel = (f >= lo) & (f <= hi) & (f > 0)
    if np.count_nonzero(sel) < 8:
        raise InputError(str(recording), None, "the two recordings share no excited band")
    _, mismatch = relative_from_swap(tf_i.h[sel], h_ii[sel])
    fb = f[sel]
    edges = np.geomspace(fb[0], fb[-1] * (1 + 1e-9), RELATIVE_POINTS + 1)
    idx = np.clip(np.searchsorted(edges, fb, side="right") - 1, 0, RELATIVE_POINTS - 1)
    mag, ph, ff = [], [], []
    phase = np.unwrap(np.angle(mismatch))
    for k in range(RELATIVE_POINTS):
        m = idx == k
        if np.any(m):
            ff.append(float(np.exp(np.mean(np.log(fb[m])))))
            mag.append(float(np.exp(np.mean(np.log(np.abs(mismatch[m]))))))
            ph.append(float(np.degrees(np.mean(phase[m]))))
    return RelativeCalibration(inside, outside, tuple(ff), tuple(mag), tuple(ph),
                               (str(recording), str(swapped)))


def calibration_document(cal: Any) -> dict[str, Any]:
    """The ``calibrate --json`` document: what the calibration file holds."""
    from dataclasses import asdict

    from .._version import __version__

    return {"schema": "characterize.calibration/1", "tool_version": __version__,
            "channels": [asdict(c) for _, c in sorted(cal.channels.items())],
            "relative": None if cal.relative is None else asdict(cal.relative)}


@click.command(short_help="Channel sensitivity from a calibrator, or a microphone swap.")
@click.argument("recording", type=click.Path(path_type=Path))
@click.option("--channel", type=int, default=None,
              help="Channel (from 1) that recorded the calibrator's tone.")
@click.option("--level", "level_db", type=Level("dB"), default=94.0, show_default=True,
              help="The calibrator's level ('94 dB'; a bare number is dB SPL; 94 dB = 1 Pa, "
                   "114 dB = 10 Pa).")
@click.option("--swap", "swapped", type=click.Path(path_type=Path), default=None,
              help="Second recording with the two microphones exchanged: store the "
                   "channels' relative gain and phase (ISO 10534-2 switching).")
@click.option("--sweep", "sweep_path", type=click.Path(path_type=Path), default=None,
              help="With --swap: the sweep that was played (else H1 from any broadband signal).")
@click.option("--inside", type=int, default=1, show_default=True,
              help="With --swap: channel of the inside microphone in RECORDING.")
@click.option("--outside", type=int, default=2, show_default=True,
              help="With --swap: channel of the outside microphone in RECORDING.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path),
              required=True, help="Folder for DIR/calibration.toml (give 'fit --calibration' "
                                  "the folder or the file).")
@click.option("--json", "as_json", is_flag=True, help="Print the calibration document (JSON).")
@click.option("--merge", is_flag=True,
              help="Add to an existing calibration file, keeping its other entries.")
@click.option("--force", is_flag=True, help="Overwrite an existing calibration file.")
@handles_errors
def calibrate(recording: Path, channel: int | None, level_db: float, swapped: Path | None,
              sweep_path: Path | None, inside: int, outside: int, out_dir: Path,
              as_json: bool, merge: bool, force: bool) -> None:
    """Store a channel's sensitivity from a calibrator RECORDING, or (with --swap)
    the relative gain and phase of the inside and outside channels."""
    from ..calibration import (
        Calibration,
        ChannelCalibration,
        analyze_tone,
        read_calibration,
        write_calibration,
    )
    from ..errors import InputError
    from ..fileio import check_writable, out_folder
    from ..physics.spl import spl_to_pressure_pa

    if (channel is None) == (swapped is None):
        raise InputError("calibrate", None, "give either --channel N (a calibrator tone) or "
                         "--swap SECOND_RECORDING (a microphone swap)")
    if merge and force:
        raise InputError("--merge/--force", None, "give one of them")
    if not (-20.0 <= level_db <= 180.0):
        raise InputError("--level", None, f"{level_db:g} dB is not a calibrator level "
                         "(expected e.g. 94 or 114)")
    base = Calibration()
    out_path = out_folder(out_dir, ["calibration.toml"], force=True)[0]
    if merge and out_path.exists():
        base = read_calibration(out_path)
    else:
        check_writable(out_path, force=force, what="calibration file")
    if channel is not None:
        from ..audio import check_channel, read_audio

        rec = read_audio(recording)
        check_channel(rec, channel, "--channel")
        tone = analyze_tone(rec.channel(channel), rec.rate_hz, source=str(recording),
                            field_name=f"--channel {channel}")
        k = tone.rms_fs / float(spl_to_pressure_pa(level_db))
        cal = base.with_channel(ChannelCalibration(channel, k, level_db, tone.frequency_hz,
                                                   str(recording)))
        write_calibration(out_path, cal, force=True)
        said = (f"channel {channel}: {tone.frequency_hz:.1f} Hz tone at "
                f"{tone.level_dbfs:.2f} dBFS rms over {tone.stable_s:.1f} s (spread "
                f"{tone.spread_db:.2f} dB) = {level_db:g} dB SPL -> sensitivity "
                f"{k:.5g} FS/Pa ({20 * math.log10(k):.2f} dB re 1 FS/Pa); "
                f"wrote {out_path}")
    else:
        assert swapped is not None
        rel = _relative(recording, swapped, sweep_path, inside, outside)
        cal = base.with_relative(rel)
        write_calibration(out_path, cal, force=True)
        import numpy as np

        mags = np.asarray(rel.ratio_magnitude)
        phs = np.asarray(rel.ratio_phase_deg)
        said = (f"channels {inside}/{outside}: relative gain {20 * np.log10(mags.min()):+.2f} "
                f"to {20 * np.log10(mags.max()):+.2f} dB, phase {phs.min():+.2f} to "
                f"{phs.max():+.2f}° over {rel.freqs_hz[0]:.0f} to "
                f"{rel.freqs_hz[-1]:.0f} Hz; wrote {out_path}")
    if as_json:
        from ..report.document import to_json

        click.echo(to_json(calibration_document(cal)), nl=False)
    else:
        click.echo(said)
    click.echo("caution: sound calibrators and test signals can be loud; keep the calibrator "
               "on the microphone, protect your hearing above 85 dB(A) and follow local "
               "occupational-noise rules", err=True)

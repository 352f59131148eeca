"""``measure`` through the real sounddevice/PortAudio path: a PulseAudio server with
one null sink, played into and recorded from its monitor (what is played on
output k comes back on input k, bit-exact; shared/reference/audio-loopback.md).

The fixture starts the server as in that note, in a private runtime folder, and
stops it by its pid. Outside CI the tests are skipped (saying why) when the
server cannot start; under CI (CI=true) they must run: .ci/run installs
libportaudio2, pulseaudio and libasound2-plugins.

Every client runs in a subprocess with the server's XDG_RUNTIME_DIR and
PULSE_SERVER, so this test process never loads PortAudio.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

REPO = Path(__file__).resolve().parents[1]
OBJECT = REPO / "example_audio" / "listening-jar-04.toml"
SINK_RATE = 48000


def _unavailable(reason: str) -> None:
    if os.environ.get("CI", "").lower() in ("1", "true", "yes"):
        pytest.fail(f"the loopback test must run in CI: {reason} (.ci/run installs "
                    "libportaudio2, pulseaudio and libasound2-plugins)")
    pytest.skip(f"no PulseAudio loopback here: {reason}")


def _state(pid: int) -> str | None:
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    return text.rsplit(")", 1)[1].split()[0]


@pytest.fixture(scope="module")
def loopback(tmp_path_factory):
    """A PulseAudio null sink; yields the environment its clients need."""
    if shutil.which("pulseaudio") is None or shutil.which("pactl") is None:
        _unavailable("pulseaudio/pactl not installed (Debian package pulseaudio)")
    probe = subprocess.run([sys.executable, "-c", "import sounddevice"], capture_output=True,
                           text=True, timeout=60)
    if probe.returncode != 0:
        _unavailable("python-sounddevice or PortAudio missing: "
                     + (probe.stderr.strip().splitlines() or ["?"])[-1])
    runtime = tmp_path_factory.mktemp("pulse-runtime")
    runtime.chmod(0o700)
    env = dict(os.environ, XDG_RUNTIME_DIR=str(runtime),
               PULSE_SERVER=f"unix:{runtime}/pulse/native")
    start = subprocess.run(
        ["pulseaudio", "-D", "-n", "--exit-idle-time=-1", "--use-pid-file=yes",
         f"--load=module-null-sink sink_name=loop format=float32le rate={SINK_RATE} "
         "channels=2", "--load=module-native-protocol-unix"],
        env=env, capture_output=True, text=True, timeout=60)
    pid_file = runtime / "pulse" / "pid"
    ready = False
    for _ in range(40):
        sinks = subprocess.run(["pactl", "list", "short", "sinks"], env=env,
                               capture_output=True, text=True, timeout=30)
        if sinks.returncode == 0 and "loop" in sinks.stdout:
            ready = True
            break
        time.sleep(0.25)
    pid = int(pid_file.read_text().split()[0]) if pid_file.exists() else None
    try:
        if not ready:
            _unavailable(f"the server did not start with a null sink (exit {start.returncode}: "
                         f"{start.stderr.strip()[-200:]})")
        yield env
    finally:
        if pid is not None:
            try:
                os.kill(pid, 15)
            except ProcessLookupError:
                pass
            for _ in range(40):  # gone, or a zombie waiting for its parent
                if _state(pid) in (None, "Z"):
                    break
                time.sleep(0.25)


def _characterize(args: list[str], env: dict[str, str]) -> subprocess.CompletedProcess[str]:
    exe = Path(sys.executable).with_name("characterize")
    cmd = [str(exe)] if exe.exists() else [sys.executable, "-m", "characterize"]
    return subprocess.run(cmd + args, env=env, capture_output=True, text=True, timeout=600)


#: Runs measure() on the real 'pulse' device, with output 1 passed through a known
#: resonator in software on its way to output 1 (the inside microphone's path) and
#: the plain sweep on output 2 (the outside microphone's), so the fit has a known
#: truth. On the first take the wrapper zeroes 2000 recorded samples mid-sweep (a
#: dropout like the loopback's own): measure must find it and repeat the take.
SCRIPT = r"""
import json, sys
import numpy as np
from characterize.live.bench import DeviceBench
from characterize.live.devices import find_device
from characterize.live.measure import MeasureSettings, measure
from characterize.simulate import Setup, true_transfer

F0, Q = 500.0, 20.0

class ResonatorLoopback(DeviceBench):
    plays = 0
    def play_record(self, signal, rate_hz, in_channels):
        self.plays += 1
        x = np.asarray(signal, dtype=np.float64)[:, 0]
        n = x.size
        n_fft = 1 << int(np.ceil(np.log2(2 * n)))
        f = np.fft.rfftfreq(n_fft, 1 / rate_hz)
        h = true_transfer(Setup(f0_hz=F0, q=Q, rate_hz=rate_hz, gain_inside=0.5,
                                gain_outside=1.0, delay_s=0.0), f)
        inside = np.fft.irfft(np.fft.rfft(x, n_fft) * h, n_fft)[:n]
        take = super().play_record(np.stack([inside, x], axis=1), rate_hz, in_channels)
        if self.plays == 2:  # the first sweep take (play 1 is the level probe)
            k = take.frames // 2
            take.recorded[k:k + 2000] = 0.0
        return take

bench = ResonatorLoopback(find_device("pulse", inputs=2, outputs=2))
# extra tries: a busy shared machine gets real dropouts (each is detected and kept)
s = MeasureSettings(rate_hz=48000.0, start_hz=60.0, stop_hz=4000.0, duration_s=1.5,
                    tail_s=0.5, level_dbfs=-36.0, outputs=(1,), max_tries=8)
m = measure(bench, sys.argv[2], s, sys.argv[1], say=lambda t: print("say:", t))
fit = m.result.fit
print(json.dumps({"f0_hz": fit.f0_hz, "f0_stderr_hz": fit.f0_stderr_hz, "q": fit.q,
                  "q_stderr": fit.q_stderr, "take": str(m.takes[0].path),
                  "rejected": m.takes[0].rejected, "sweep": str(m.takes[0].sweep_path)}))
"""


def test_measure_through_portaudio_recovers_resonator_and_retries_a_gap(loopback, tmp_path):
    out = tmp_path / "run"
    proc = subprocess.run([sys.executable, "-c", SCRIPT, str(out), str(OBJECT)], env=loopback,
                          capture_output=True, text=True, timeout=600, cwd=REPO)
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    res = json.loads(proc.stdout.strip().splitlines()[-1])
    # the dropout on the first take was found in the recording and the take repeated
    assert res["rejected"], proc.stdout
    assert "gap" in res["rejected"][0]["reason"] or "dropout" in res["rejected"][0]["reason"]
    assert Path(res["rejected"][0]["file"]).exists()  # nothing recorded is lost
    # known truth put in by the wrapper (closed-form resonator, characterize.simulate):
    # the fit through the real stream recovers it within its own errors (the path is
    # bit-exact up to the 24-bit FLAC)
    assert abs(res["f0_hz"] - 500.0) <= max(4 * res["f0_stderr_hz"], 1e-4 * 500.0)
    assert abs(res["q"] - 20.0) <= max(4 * res["q_stderr"], 0.01 * 20.0)
    # the take itself: each channel is its own played signal delayed by the measured
    # latency, at the played level (bit-exact loopback, 24-bit file)
    take = Path(res["take"])
    side = json.loads(take.with_suffix(".json").read_text())
    assert side["device"]["host_api"] == "ALSA" and side["rate_hz"] == 48000.0
    assert side["accepted"] is True
    lat = side["check"]["delay_samples"]
    assert 0 < lat < 48000  # the note measured 515 to 16391 samples
    rec, fs = sf.read(take, dtype="float64", always_2d=True)
    sweep, _ = sf.read(res["sweep"], dtype="float64")
    lead = int(round(side["lead_in_s"] * fs))
    n = sweep.size
    outside = rec[lead + lat:lead + lat + n, 1]
    assert np.max(np.abs(outside - sweep)) < 1e-6  # 24-bit rounding only
    peak_db = 20 * np.log10(np.max(np.abs(outside)))
    assert abs(peak_db - (-36.0)) < 0.01
    # the inside channel carries the resonator, not the sweep: channels stay separate
    inside = rec[lead + lat:lead + lat + n, 0]
    assert np.corrcoef(inside, outside)[0, 1] < 0.9
    assert np.max(np.abs(inside)) > 4 * np.max(np.abs(outside))  # ~Q x 0.5 at resonance


def test_a_silent_input_is_retried_then_refused_in_one_line(loopback, tmp_path):
    """The sweep on output 1 only: input 2 (the sink monitor's second channel) comes
    back all zeros, as the note measured for a silent channel (and as a disconnected
    microphone on a digital input would). measure must see it in the recording,
    retry, then stop with exit 2 naming the input and the fixes, keeping every try.

    (The note also found that a rate other than the sink's records all zeros; on
    this machine under heavy load, with the 0.2 s stream buffer, 44.1 kHz against
    the 48 kHz sink sometimes recorded real data after two silent tries, so that
    case is not a deterministic test here; tests/test_live.py covers silent takes.)"""
    out = tmp_path / "silent"
    proc = _characterize(["measure", "--object", str(OBJECT), "--device", "pulse", "--rate",
                          str(SINK_RATE), "--output", "1", "--duration", "0.5", "--out",
                          str(out)], loopback)
    assert proc.returncode == 2, proc.stderr[-2000:]
    err = [ln for ln in proc.stderr.splitlines() if ln.startswith("characterize: error")]
    assert len(err) == 1 and "all zeros on input 2" in err[0] and "--rate" in err[0], \
        proc.stderr[-2000:]
    assert "Traceback" not in proc.stderr
    assert len(list(out.glob("probe*.flac"))) == 4  # every try kept


def test_devices_lists_the_pulse_device(loopback):
    proc = _characterize(["devices", "--json"], loopback)
    assert proc.returncode == 0, proc.stderr
    devs = json.loads(proc.stdout)
    pulse = [d for d in devs if d["name"] == "pulse"]
    assert pulse and pulse[0]["max_input_channels"] >= 2 and pulse[0]["host_api"] == "ALSA"

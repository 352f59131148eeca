"""Fuzz the readers of user files (a benchmark-style script, never a unit test).

Targets, each fed arbitrary bytes as the content of a file:

- ``audio``: ``characterize.audio.read_audio`` (WAV, FLAC, AIFF through libsndfile);
- ``object``: ``characterize.physics.geometry.load_object`` (object files, TOML);
- ``sidecar``: ``characterize.excitation.read_sidecar`` (sweep sidecars, TOML).

The contract under test: a reader returns a valid value or raises
``InputError`` with a one-line message. Anything else (another exception, a
multi-line message, a crash of the process) is a crash; the script counts
distinct crashes (by exception type and the innermost frame in the project)
and goes on, then prints the inputs tried and the crashes found, per target.

Engine: atheris (coverage-guided, libFuzzer; ``pip install atheris``), with the
project's modules instrumented and a seed corpus of valid files; without it,
hypothesis with a large budget (``st.binary()`` plus mutated seeds).

Run:  python benchmarks/fuzz_readers.py [--runs 20000] [--target all|audio|object|sidecar]
      [--engine atheris|hypothesis]
"""

from __future__ import annotations

import argparse
import io
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
import traceback
from pathlib import Path

TARGETS = ("audio", "object", "sidecar")

GOOD_OBJECT = b"""name = "jar-07"
[cavity]
volume = "355 mL"
[neck]
diameter = "18 mm"
length = "40 mm"
outer_end = "unflanged"
inner_end = "flanged"
[air]
temperature = "21 degC"
relative_humidity = 0.45
pressure = "101.325 kPa"
"""


def seeds(target: str) -> list[bytes]:
    """Valid inputs to start from."""
    if target == "object":
        return [GOOD_OBJECT, GOOD_OBJECT.replace(b"unflanged", b"flanged"),
                b'[cavity]\nvolume = "1.6 L"\n[neck]\ndiameter = "16 mm"\nlength = "18 mm"\n'
                b'outer_end = "flanged"\ninner_end = "flanged"\n']
    if target == "sidecar":
        from characterize.excitation import SweepParams, sidecar_text

        return [sidecar_text(SweepParams(20.0, 3000.0, 5.0, 48000.0, -12.0)).encode(),
                sidecar_text(SweepParams(40.0, 2000.0, 1.5, 16000.0, -6.0, 0.0, 0.0, 0.5)).encode()]
    import numpy as np
    import soundfile as sf

    rng = np.random.default_rng(0)
    x = 0.3 * rng.standard_normal((256, 2))
    out = []
    for fmt, sub in [("WAV", "PCM_16"), ("WAV", "FLOAT"), ("WAV", "PCM_24"), ("FLAC", "PCM_16"),
                     ("AIFF", "PCM_16"), ("WAV", "IMA_ADPCM"), ("WAV", "ULAW")]:
        buf = io.BytesIO()
        sf.write(buf, x, 8000, format=fmt, subtype=sub)
        out.append(buf.getvalue())
    return out


class Checker:
    """Calls one reader on bytes; records crashes instead of stopping."""

    def __init__(self, target: str, workdir: Path) -> None:
        from characterize.audio import read_audio
        from characterize.errors import InputError
        from characterize.excitation import read_sidecar
        from characterize.objectfile import load_object

        self.InputError = InputError
        self.fn = {"audio": read_audio, "object": load_object, "sidecar": read_sidecar}[target]
        suffix = {"audio": ".wav", "object": ".toml", "sidecar": ".toml"}[target]
        self.path = workdir / f"fuzz-input{suffix}"
        self.tried = 0
        self.ok = 0
        self.refused = 0
        self.crashes: dict[str, dict[str, object]] = {}
        self.figures_path: Path | None = None

    def __call__(self, data: bytes) -> None:
        self.tried += 1
        try:
            self._check(data)
        finally:
            if self.figures_path is not None:  # libFuzzer ends the process without atexit
                self.figures_path.write_text(json.dumps(self.figures()), encoding="utf-8")

    def _check(self, data: bytes) -> None:
        import warnings

        self.path.write_bytes(data)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("error")
                self.fn(self.path)
        except self.InputError as exc:
            if "\n" in str(exc) or "\r" in str(exc):
                self._crash("multi-line InputError", data, str(exc))
            else:
                self.refused += 1
        except Exception as exc:  # the contract allows InputError only
            tb = traceback.extract_tb(exc.__traceback__)
            ours = [f for f in tb if "characterize" in f.filename] or tb
            where = f"{Path(ours[-1].filename).name}:{ours[-1].lineno}"
            self._crash(f"{type(exc).__name__} at {where}", data, str(exc)[:200])
        else:
            self.ok += 1

    def _crash(self, key: str, data: bytes, message: str) -> None:
        entry = self.crashes.setdefault(key, {"count": 0, "message": message,
                                              "example": data[:200].hex()})
        entry["count"] = int(entry["count"]) + 1  # type: ignore[call-overload]

    def figures(self) -> dict[str, object]:
        return {"tried": self.tried, "valid": self.ok, "refused": self.refused,
                "crashes": len(self.crashes), "crash_inputs": sum(
                    int(c["count"]) for c in self.crashes.values()),  # type: ignore[call-overload]
                "details": self.crashes}


def _workdir() -> Path:
    """The parent's per-target directory (it removes it), else a new temporary one."""
    given = os.environ.get("FUZZ_WORKDIR")
    return Path(given) if given else Path(tempfile.mkdtemp(prefix="characterize-fuzz-"))


def run_atheris(target: str, runs: int) -> dict[str, object]:
    import atheris

    with atheris.instrument_imports(include=["characterize"]):
        import characterize.audio  # noqa: F401
        import characterize.excitation  # noqa: F401
        import characterize.physics.geometry  # noqa: F401
        import characterize.units  # noqa: F401
    work = _workdir()
    corpus = work / "corpus"
    corpus.mkdir()
    for i, s in enumerate(seeds(target)):
        (corpus / f"seed{i}").write_bytes(s)
    check = Checker(target, work)
    check.figures_path = Path(os.environ.get("FUZZ_FIGURES", work / "figures.json"))
    atheris.Setup([sys.argv[0], f"-runs={runs}", "-max_len=4096", "-rss_limit_mb=4096",
                   str(corpus)], check)
    atheris.Fuzz()  # ends the process when the runs are done (figures are on disk)
    return {}


def run_hypothesis(target: str, runs: int) -> dict[str, object]:
    from hypothesis import HealthCheck, given, settings
    from hypothesis import strategies as st

    work = _workdir()
    check = Checker(target, work)
    base = seeds(target)

    def mutate(seed: bytes, edits: list[tuple[int, int]], cut: int) -> bytes:
        b = bytearray(seed)
        for pos, val in edits:
            if b:
                b[pos % len(b)] = val
        return bytes(b[: max(0, cut)] if cut < len(b) else b)

    inputs = st.one_of(
        st.binary(max_size=4096),
        st.builds(mutate, st.sampled_from(base),
                  st.lists(st.tuples(st.integers(0, 4095), st.integers(0, 255)), max_size=8),
                  st.integers(0, 5000)),
    )
    t0 = time.perf_counter()

    @settings(max_examples=runs, deadline=None, database=None,
              suppress_health_check=list(HealthCheck))
    @given(inputs)
    def prop(data: bytes) -> None:
        check(data)

    prop()
    fig = check.figures()
    fig.update(target=target, engine="hypothesis", seconds=time.perf_counter() - t0)
    print("FIGURES " + json.dumps(fig), flush=True)
    return fig


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=20000, help="inputs per target")
    ap.add_argument("--target", choices=[*TARGETS, "all"], default="all")
    ap.add_argument("--engine", choices=["atheris", "hypothesis", "auto"], default="auto")
    opts = ap.parse_args()
    engine = opts.engine
    if engine == "auto":
        try:
            import atheris  # noqa: F401

            engine = "atheris"
        except ImportError:
            engine = "hypothesis"
    if opts.target != "all":
        (run_atheris if engine == "atheris" else run_hypothesis)(opts.target, opts.runs)
        return
    rows = []
    for target in TARGETS:  # one process per target (libFuzzer runs one target per process)
        t = time.perf_counter()
        work = Path(tempfile.mkdtemp(prefix="characterize-fuzz-"))
        fig_path = work / "figures.json"
        try:
            proc = subprocess.run([sys.executable, __file__, "--runs", str(opts.runs),
                                   "--target", target, "--engine", engine],
                                  capture_output=True, text=True,
                                  env={**os.environ, "OMP_NUM_THREADS": "1",
                                       "FUZZ_FIGURES": str(fig_path), "FUZZ_WORKDIR": str(work)})
            figures = fig_path.read_text(encoding="utf-8") if fig_path.exists() else None
        finally:
            shutil.rmtree(work, ignore_errors=True)
        line = next((ln for ln in proc.stdout.splitlines() if ln.startswith("FIGURES ")), None)
        if line is None and figures is not None and proc.returncode == 0:
            fig = json.loads(figures)
            fig.update(target=target, engine=engine, seconds=time.perf_counter() - t)
            line = "FIGURES " + json.dumps(fig)
        if line is None:  # the process itself died: a crash of the reader's C code
            rows.append({"target": target, "engine": engine, "tried": "?", "valid": "?",
                         "refused": "?", "crashes": "process died",
                         "seconds": time.perf_counter() - t,
                         "details": {"stderr": proc.stderr[-2000:]}})
        else:
            rows.append(json.loads(line[len("FIGURES "):]))
    print(f"Fuzz run ({engine}, {opts.runs} inputs per target)\n")
    print("| reader | inputs tried | valid | refused (InputError) | crashes | time |")
    print("|---|---|---|---|---|---|")
    names = {"audio": "audio.read_audio (WAV/FLAC/AIFF)",
             "object": "geometry.load_object (TOML)", "sidecar": "excitation.read_sidecar (TOML)"}
    for r in rows:
        print(f"| {names[r['target']]} | {r['tried']} | {r['valid']} | {r['refused']} | "
              f"{r['crashes']} | {float(r['seconds']):.0f} s |")
    for r in rows:
        if r["details"]:
            print(f"\n{r['target']}: " + json.dumps(r["details"], indent=1)[:3000])


if __name__ == "__main__":
    main()

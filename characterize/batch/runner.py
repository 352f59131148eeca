"""Running a batch: worker processes analyse the items, each item's document
written as soon as it is done (resumable), then the summary and the reports."""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..batchdata import BatchSummary, ItemOutcome, Spec, timestamp_now
from ..errors import FitError, InputError
from .items import _failure, _load_valid, _one_line, _settings
from .manifest import Manifest, ManifestItem, item_file_stem, read_manifest
from .reports import REPORT_FILES, write_reports
from .spec import read_spec
from .summary import outcome, summarize


class BatchInterrupted(RuntimeError):
    """A worker process died (killed, out of memory): the batch stopped early.

    Every item finished before that has its document on disk; rerun with
    ``resume=True`` (``--resume``) to do the rest.
    """


@dataclass(frozen=True)
class _Task:
    item: ManifestItem
    settings: dict[str, Any]
    items_dir: str
    analyze_fn: Callable[..., Any] | None = None


def _work(task: _Task) -> dict[str, Any]:
    """Analyse one item in a worker process and write its document (and plot)."""
    from ..report.document import write_document

    s = task.settings
    items_dir = Path(task.items_dir)
    stem = item_file_stem(s["id"])
    doc_path = items_dir / f"{stem}.json"
    try:
        if task.analyze_fn is None:
            from ..pipeline import analyze as fn
        else:
            fn = task.analyze_fn
        result = fn(s["recording"], object_path=s["object"], sweep_path=s["sweep"],
                    inside=s["inside"], outside=s["outside"], tolerance=s["tolerance"])
    except InputError as exc:
        doc = _failure(s, "input", str(exc))
    except FitError as exc:
        doc = _failure(s, "no-fit", f"no fit: {exc}")
    except Exception as exc:  # noqa: BLE001  (a batch survives a bad item)
        doc = _failure(s, "unexpected", f"{type(exc).__name__}: {exc}")
    else:
        doc = result.to_dict()
        plot: str | None = f"{stem}.png"
        try:
            from ..report.plots import response_plot

            response_plot(result, items_dir / f"{stem}.png")
        except Exception as exc:  # noqa: BLE001  (the numbers matter more than the picture)
            plot = None
            doc.setdefault("flags", []).append(
                {"code": "plot-failed", "severity": "info",
                 "message": _one_line(f"the response plot could not be drawn: {exc}")})
        doc["batch_item"] = dict(s, plot=plot)
    write_document(doc_path, doc)
    return doc


def default_workers() -> int:
    """All the cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def _mp_context() -> Any:
    """Worker start method: the platform's default (fork on Linux up to Python
    3.13, a fork server from 3.14, spawn on macOS and Windows; a program may
    choose another with ``multiprocessing.set_start_method``). With a fork
    server the heavy modules are imported once, in the server.

    With spawn or a fork server, a script that calls :func:`run_batch` must
    guard its top level with ``if __name__ == "__main__":``.
    """
    import multiprocessing as mp

    ctx = mp.get_context()
    if ctx.get_start_method() == "forkserver":
        ctx.set_forkserver_preload(["characterize.pipeline", "characterize.report.plots",
                                    "characterize.report.document"])
    return ctx


def _init_worker() -> None:
    """Worker start-up: the modules an item needs, and matplotlib's backend and
    fonts, loaded once (in the parent before forking, so workers start warm)."""
    from ..report import plots

    plots.warm_up()
    from .. import pipeline  # noqa: F401
    from ..report import document  # noqa: F401


def _worker_start(warm_up: bool) -> None:
    """Worker process start: leave Ctrl-C to the parent (which stops handing out
    items and lets the running ones finish), and warm up unless forked warm."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if warm_up:
        _init_worker()


def check_outputs(manifest: Manifest, out_dir: str | os.PathLike[str], *, resume: bool,
                  force: bool) -> Path:
    """Refuse to overwrite a previous batch's files without ``resume`` or ``force``."""
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise InputError(str(out), None, "--out must be a directory")
    if resume or force:
        return out
    for name in REPORT_FILES:
        if (out / name).exists():
            raise InputError(str(out / name), None, "exists; use --resume to continue that "
                             "batch or --force to start over")
    for item in manifest.items:
        p = out / "items" / f"{item.file_stem}.json"
        if p.exists():
            raise InputError(str(p), None, "exists; use --resume to continue that batch "
                             "or --force to start over")
    return out


def run_batch(manifest: Manifest, spec: Spec, out_dir: str | os.PathLike[str], *,
              workers: int | None = None, resume: bool = False, force: bool = False,
              progress: Callable[[ItemOutcome], None] | None = None,
              analyze_fn: Callable[..., Any] | None = None) -> BatchSummary:
    """Analyse every item in worker processes and summarise the batch.

    Parameters
    ----------
    manifest, spec
        From :func:`read_manifest` and :func:`read_spec`.
    out_dir : path
        Output directory; item documents go to ``out_dir/items/ID.json``
        (and the response plot to ``ID.png``) as each item finishes.
    workers : int, optional
        Worker processes; default all cores (never more than items to do).
    resume : bool
        Keep every item whose document exists and was made from the same
        inputs; do the rest (failed items are retried).
    force : bool
        Recompute and overwrite previous documents.
    progress : callable, optional
        Called in this process with each item's :class:`ItemOutcome` as it is
        done (kept items first, at once).
    analyze_fn : callable, optional
        Replacement for :func:`characterize.pipeline.analyze` (tests); must
        be picklable (a module-level function).

    Raises
    ------
    InputError
        Existing outputs without ``resume``/``force``; an unwritable ``out_dir``.
    BatchInterrupted
        A worker process died; finished items are on disk (resume).
    """
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from concurrent.futures.process import BrokenProcessPool

    out = check_outputs(manifest, out_dir, resume=resume, force=force)
    items_dir = out / "items"
    try:
        items_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(str(items_dir), None, f"cannot create: {exc.strerror or exc}") from None
    started = timestamp_now()
    docs: dict[str, dict[str, Any]] = {}
    todo: list[_Task] = []
    for item in manifest.items:
        s = _settings(item, spec)
        doc = _load_valid(item, s, items_dir) if resume else None
        if doc is not None:
            docs[item.id] = doc
            if progress is not None:
                progress(outcome(item, doc, spec))
        else:
            todo.append(_Task(item, s, str(items_dir), analyze_fn))
    kept = len(docs)
    n_workers = 0
    if todo:
        n_workers = max(1, min(workers or default_workers(), len(todo)))
        ctx = _mp_context()
        forked = ctx.get_start_method() == "fork"
        if forked:
            _init_worker()  # once here; the forked workers inherit it
        pool = ProcessPoolExecutor(n_workers, mp_context=ctx, initializer=_worker_start,
                                   initargs=(not forked,))
        try:
            futures = {pool.submit(_work, t): t for t in todo}
            for fut in as_completed(futures):
                task = futures[fut]
                try:
                    doc = fut.result()
                except BrokenProcessPool:
                    raise
                except Exception as exc:  # noqa: BLE001  (e.g. the document could not be written)
                    doc = _failure(task.settings, "unexpected", f"{type(exc).__name__}: {exc}")
                    from ..report.document import write_document

                    write_document(items_dir / f"{task.item.file_stem}.json", doc)
                docs[task.item.id] = doc
                if progress is not None:
                    progress(outcome(task.item, doc, spec))
        except BrokenProcessPool:
            pool.shutdown(wait=True, cancel_futures=True)
            done = len(docs)
            raise BatchInterrupted(
                f"a worker process died after {done} of {len(manifest.items)} items were done; "
                "the finished items are saved: rerun with --resume") from None
        except BaseException:
            pool.shutdown(wait=True, cancel_futures=True)
            raise
        pool.shutdown(wait=True)
    run = {"started": started, "finished": timestamp_now(), "workers": n_workers,
           "kept_items": kept, "computed_items": len(todo)}
    return summarize(manifest, spec, docs, run)


def run(manifest_path: str | os.PathLike[str], spec_path: str | os.PathLike[str],
        out_dir: str | os.PathLike[str], *, workers: int | None = None, resume: bool = False,
        force: bool = False, progress: Callable[[ItemOutcome], None] | None = None,
        analyze_fn: Callable[..., Any] | None = None) -> BatchSummary:
    """Everything ``characterize batch`` does: read, run, summarise, write reports."""
    spec = read_spec(spec_path)
    manifest = read_manifest(manifest_path, spec)
    check_outputs(manifest, out_dir, resume=resume, force=force)
    summary = run_batch(manifest, spec, out_dir, workers=workers, resume=resume, force=force,
                        progress=progress, analyze_fn=analyze_fn)
    write_reports(summary, out_dir)
    return summary

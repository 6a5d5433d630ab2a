"""A production lot judged against a limit spec, as ``piezo batch`` reports it.

:func:`judge_lot` expands the inputs, judges every capture
(:func:`~piezo.batch.runner.run_batch`) and, given a folder, writes the result files
(:func:`~piezo.batch.outputs.write_outputs`). :class:`LotVerdicts` holds the rows, and
:meth:`LotVerdicts.to_dict` is the command's ``--json`` document.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from piezo.batch.outputs import summarize, write_outputs
from piezo.batch.runner import expand_inputs, run_batch
from piezo.batch.spec import Spec, load_spec
from piezo.batch.verdict import FAIL, NOT_EVALUABLE
from piezo.results import to_jsonable

__all__ = ["LotVerdicts", "judge_lot"]


@dataclass(frozen=True)
class LotVerdicts:
    """The verdict rows of a lot, with the spec they were judged against.

    Attributes
    ----------
    rows
        One row per capture, sorted by file (keys in
        :func:`~piezo.batch.runner.evaluate_capture`).
    spec
        The limit spec.
    out
        Folder the result files were written to, or None.
    reused
        Rows taken from an earlier run (``--resume``) instead of judged again.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from piezo.batch.spec import load_spec
    >>> from piezo.demo import lot
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "spec.toml").write_text(lot.spec_text())
    >>> _ = (folder / "pd27-golden.csv").write_text(lot.golden_response_csv())
    >>> empty = LotVerdicts((), load_spec(folder / "spec.toml"))
    >>> empty.to_dict()["captures"], empty.failing
    (0, [])
    """

    rows: tuple[dict[str, Any], ...]
    spec: Spec
    out: str | None = None
    reused: int = 0

    def summary(self) -> dict[str, Any]:
        """Counts per verdict, yield, and per-metric statistics (Cp, Cpk)."""
        return summarize(self.rows, self.spec)

    @property
    def failing(self) -> list[dict[str, Any]]:
        """Rows that fail or cannot be evaluated (``piezo batch`` exits 1 for any)."""
        return [r for r in self.rows if r["verdict"] in (FAIL, NOT_EVALUABLE)]

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo batch --json`` document (plain JSON values)."""
        summary = self.summary()
        doc = {
            "out": self.out,
            "captures": summary["captures"],
            "reused": self.reused,
            "counts": summary["counts"],
            "yield": summary["yield"],
            "failing": [
                {
                    "file": r["file"],
                    "serial": r["serial"],
                    "verdict": r["verdict"],
                    "failed_limits": r["failed_limits"],
                    "not_evaluable": r["not_evaluable"],
                }
                for r in self.failing
            ],
        }
        return to_jsonable(doc)


def judge_lot(
    inputs: Sequence[str | Path],
    spec: Spec | str | Path,
    *,
    out: str | Path | None = None,
    workers: int | None = None,
    cluster: Any = None,
    previous: Mapping[tuple[str, str], Mapping[str, Any]] | None = None,
) -> LotVerdicts:
    """Judge every capture of ``inputs`` against ``spec``.

    Parameters
    ----------
    inputs
        Capture files, folders (searched recursively) or glob patterns.
    spec
        A validated :class:`~piezo.batch.spec.Spec` or the path of a spec file.
    out
        Folder for results.csv, results.json, junit.xml and summary.html (created);
        nothing is written when None.
    workers, cluster, previous
        As for :func:`~piezo.batch.runner.run_batch` (local processes, a Dask scheduler,
        rows of an earlier run to reuse).

    Examples
    --------
    A lot of one unit of the demo line (:mod:`piezo.demo.lot`), judged in this process:

    >>> import pathlib, tempfile
    >>> import numpy as np, soundfile as sf
    >>> from piezo.demo import lot
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (folder / "pd27-spec.toml").write_text(lot.spec_text())
    >>> _ = (folder / "pd27-golden.csv").write_text(lot.golden_response_csv())
    >>> rng = np.random.default_rng(1)
    >>> capture = lot.simulate_capture(lot.draw_unit("24999", rng), rng)
    >>> sf.write(folder / "PD27-24999.flac", capture, int(lot.SAMPLE_RATE_HZ))
    >>> verdicts = judge_lot([folder / "PD27-24999.flac"], folder / "pd27-spec.toml",
    ...                      workers=1)
    >>> doc = verdicts.to_dict()
    >>> doc["captures"], doc["counts"]["pass"], doc["failing"]
    (1, 1, [])
    """
    if not isinstance(spec, Spec):
        spec = load_spec(spec)
    files = expand_inputs([str(i) for i in inputs])
    reused = 0

    def count(row: dict[str, Any], was_reused: bool) -> None:
        nonlocal reused
        reused += was_reused

    rows = run_batch(
        files, spec, workers=workers, cluster=cluster, previous=previous, on_row=count
    )
    if out is not None:
        Path(out).mkdir(parents=True, exist_ok=True)
        write_outputs(out, rows, spec)
    return LotVerdicts(tuple(rows), spec, None if out is None else str(out), reused)

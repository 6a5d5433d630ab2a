"""One analysis run for a report: every analysis fed from a single pass over the file.

:func:`analyse` reads the calibrated source once, in blocks, and feeds each streaming
analysis; :class:`RunResults` holds their result objects. The JSON document
(:func:`piezo.report.build.report_document`) and the figures are both made from these
objects, so nothing is computed twice.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import Any

from piezo.chain import CalibratedSource
from piezo.diagnostics import CaptureDiagnostics, Thresholds, checker_for_source
from piezo.errors import InputError

__all__ = ["ReportSettings", "RunResults", "analyse"]


@dataclass(frozen=True)
class ReportSettings:
    """Every setting of a report run (all of them are printed in the report).

    Attributes
    ----------
    block_frames
        Frames per block read from the file.
    thresholds
        Thresholds of the capture diagnostics.
    frontend_design
        Front-end design file whose response is shown, or None.
    """

    block_frames: int = 65536
    thresholds: Thresholds = field(default_factory=Thresholds)
    frontend_design: Path | None = None

    def __post_init__(self) -> None:
        if not (isinstance(self.block_frames, int) and self.block_frames >= 1):
            raise InputError(
                f"block_frames: must be a whole number >= 1, got {self.block_frames!r}"
            )

    def as_dict(self) -> dict[str, Any]:
        """Settings as plain values (thresholds listed separately in the document)."""
        out: dict[str, Any] = {}
        for f in fields(self):
            if f.name == "thresholds":
                continue
            value = getattr(self, f.name)
            out[f.name] = str(value) if isinstance(value, Path) else value
        return out


@dataclass(frozen=True)
class RunResults:
    """The result objects of one run, with what they were made from."""

    source: CalibratedSource
    settings: ReportSettings
    generated_utc: str
    diagnostics: CaptureDiagnostics


def analyse(
    source: CalibratedSource,
    settings: ReportSettings,
    *,
    advance: Callable[[int], Any] | None = None,
) -> RunResults:
    """Read ``source`` once and run every analysis of the report on it.

    ``advance(frames)`` is called after each block (for a progress bar).
    """
    checker = checker_for_source(source, settings.thresholds)
    for block in source.blocks(settings.block_frames):
        checker.update(block)
        if advance is not None:
            advance(block.shape[0])
    now = _dt.datetime.now(_dt.UTC).replace(microsecond=0)
    return RunResults(
        source=source,
        settings=settings,
        generated_utc=now.isoformat().replace("+00:00", "Z"),
        diagnostics=checker.result(),
    )

"""A capture check as ``piezo check`` reports it, for Python and JSON.

:func:`check_of` streams a :class:`~piezo.chain.measurement.CalibratedSource` through
the :class:`~piezo.diagnostics.checker.CaptureChecker`; :class:`Check` holds the
diagnostics with the chain they were measured through, and :meth:`Check.to_dict` is
the command's ``--json`` document (``docs/check.schema.json``).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from piezo.chain.measurement import CalibratedSource
from piezo.diagnostics.checker import CaptureDiagnostics, Severity, checker_for_source
from piezo.diagnostics.thresholds import Thresholds
from piezo.results import to_jsonable

__all__ = ["Check", "check_of", "diagnostics_document"]


@dataclass(frozen=True)
class Check:
    """The diagnostics of one capture and the source they were measured on.

    Attributes
    ----------
    source
        The calibrated recording (chain and provenance are part of the document).
    diagnostics
        Every check per channel and for the metadata, with severities and evidence.

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib, piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "quiet.wav"
    >>> x = 0.1 * np.sin(2 * np.pi * 100 * np.arange(48000) / 48000)
    >>> sf.write(path, x, 48000, subtype="PCM_24")
    >>> doc = check_of(piezo.open(path, full_scale="2 V")).to_dict()
    >>> doc["chain"]["full_scale_v"], doc["chain"]["provenance"]["full_scale_v"]
    (2.0, 'option')
    """

    source: CalibratedSource
    diagnostics: CaptureDiagnostics

    @property
    def failed(self) -> bool:
        """True when a channel or a file-level check fails (``piezo check`` exits 1)."""
        return self.diagnostics.verdict is Severity.FAIL

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo check --json`` document: file, chain and provenance, diagnostics."""
        rec = self.source.recording
        chain = self.source.chain
        provenance = self.source.provenance
        doc: dict[str, Any] = {
            "file": str(rec.path),
            "format": rec.format,
            "subtype": rec.subtype,
            "quantity": chain.measured.name,
            "level_unit": chain.level_unit,
            "chain": {
                "quantity": chain.quantity,
                "full_scale_v": chain.full_scale_v,
                "gain": chain.gain,
                "sensitivity_v_per_unit": chain.sensitivity_v_per_unit,
                "sensitivity_v_per_pa": chain.sensitivity_v_per_pa,
                "reference_pa": chain.reference_pa,
                "provenance": provenance.as_dict() if provenance else None,
            },
        }
        doc.update(diagnostics_document(self.diagnostics))
        return to_jsonable(doc)


def diagnostics_document(diagnostics: CaptureDiagnostics) -> dict[str, Any]:
    """The diagnostics as ``check --json`` and the report name them (docs/glossary.md).

    The checker's full scale is in the capture's unit; it is given as ``full_scale_pa``
    (``None`` without a sensitivity, when the unit is volts). The level reference is the
    chain's (``chain.reference_pa``, or 1 V as ``level_unit`` says), so it is not repeated.

    Examples
    --------
    >>> import numpy as np
    >>> from piezo.diagnostics.checker import check_capture
    >>> x = 0.25 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)[:, None]
    >>> doc = diagnostics_document(check_capture(x, 48000.0, full_scale=1.0, unit="V"))
    >>> doc["full_scale_pa"], "reference" in doc   # volts: no full scale in pascals
    (None, False)
    """
    doc: dict[str, Any] = {}
    for key, value in diagnostics.as_dict().items():
        if key == "full_scale":
            doc["full_scale_pa"] = value if diagnostics.unit == "Pa" else None
        elif key != "reference":
            doc[key] = value
    return doc


def check_of(
    source: CalibratedSource,
    thresholds: Thresholds | None = None,
    *,
    advance: Callable[[int], object] | None = None,
) -> Check:
    """Check a capture before trusting numbers from it: read ``source`` once.

    Clipping, headroom, DC, dropouts, hum, roll-off and noise floor, each with a
    severity, its evidence and the threshold used (``docs/diagnostics.md``).

    Parameters
    ----------
    thresholds
        The thresholds; the defaults when None.
    advance
        Called with the frames of each block read (a progress bar).

    Examples
    --------
    >>> import numpy as np, soundfile as sf, tempfile, pathlib
    >>> import piezo
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "clipped.wav"
    >>> t = np.arange(48000) / 48000
    >>> sf.write(path, np.clip(1.5 * np.sin(2 * np.pi * 100 * t), -1, 1), 48000)
    >>> result = check_of(piezo.open(path))
    >>> result.failed, result.diagnostics.verdict.value
    (True, 'fail')
    """
    checker = checker_for_source(source, Thresholds() if thresholds is None else thresholds)
    source.feed(checker, advance=advance)
    return Check(source, checker.result())

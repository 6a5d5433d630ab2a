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

from piezo.chain.measurement import CalibratedSource, Chain, Provenance
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
        """The ``piezo check --json`` document: file, chains and provenance, diagnostics.

        Each channel entry carries its own ``quantity``, ``unit``, ``level_unit``, level
        reference, ``full_scale`` and ``chain``; the top-level ``quantity``, ``unit``,
        ``level_unit`` and ``chain`` are those shared by the analysed channels, None
        where the channels differ.
        """
        source = self.source
        rec = source.recording
        chains = source.chains
        indices = source.channel_indices
        shared = _shared(list(chains))
        first = source.provenance_of(indices[0]) if indices else source.provenance
        doc: dict[str, Any] = {
            "file": str(rec.path),
            "format": rec.format,
            "subtype": rec.subtype,
            "quantity": _shared([c.measured.name for c in chains]),
            "level_unit": _shared([c.level_unit for c in chains]),
            "chain": None if shared is None else _chain_document(shared, first),
        }
        doc.update(diagnostics_document(self.diagnostics))
        for entry, index, chain in zip(doc["channels"], indices, chains, strict=True):
            entry["quantity"] = chain.measured.name
            entry["chain"] = _chain_document(chain, source.provenance_of(index))
        return to_jsonable(doc)


def _shared(values: list[Any]) -> Any:
    """The value every channel has, or None where they differ."""
    return values[0] if values and all(v == values[0] for v in values) else None


def _chain_document(chain: Chain, provenance: Provenance | None) -> dict[str, Any]:
    """A channel's chain as ``check --json`` gives it, with where each value came from."""
    return {
        "quantity": chain.quantity,
        "full_scale_v": chain.full_scale_v,
        "gain": chain.gain,
        "sensitivity_v_per_unit": chain.sensitivity_v_per_unit,
        "sensitivity_v_per_pa": chain.sensitivity_v_per_pa,
        "reference_pa": chain.reference_pa,
        "provenance": provenance.as_dict() if provenance else None,
    }


def diagnostics_document(diagnostics: CaptureDiagnostics) -> dict[str, Any]:
    """The diagnostics as ``check --json`` and the report name them (docs/glossary.md).

    Every channel states its unit, level unit, level reference (``reference_pa``,
    ``reference_m_per_s2`` ..., ISO 1683) and full scale in its unit. At the top, the
    unit shared by the channels (None where they differ) and the full scale as
    ``full_scale_pa`` (``None`` without a sensitivity, when the unit is not pascals, or
    when the channels' full scales differ).

    Examples
    --------
    >>> import numpy as np
    >>> from piezo.diagnostics.checker import check_capture
    >>> x = 0.25 * np.sin(2 * np.pi * 1000 * np.arange(48000) / 48000)[:, None]
    >>> doc = diagnostics_document(check_capture(x, 48000.0, full_scale=1.0, unit="V"))
    >>> doc["full_scale_pa"], "reference" in doc   # volts: no full scale in pascals
    (None, False)
    >>> ch = doc["channels"][0]
    >>> ch["unit"], ch["level_unit"], ch["reference_v"], ch["full_scale"]
    ('V', 'dB re 1 V', 1.0, 1.0)
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

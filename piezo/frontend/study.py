"""A front-end design as ``piezo frontend`` reports it, and parameter studies of it.

:func:`study_frontend` reads a design file and returns a :class:`FrontendStudy`: every
figure of the design (sensitivity, corner, bands, phase, noise budget, self-noise,
dynamic range) and, optionally, a trade-off table over one design value
(:func:`vary_values`). :meth:`FrontendStudy.to_dict` is the command's ``--json``
document.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from piezo.errors import InputError
from piezo.frontend.model import (
    Frontend,
    frontend_from_mapping,
    parse_design_value,
    read_design,
    resolve_design_key,
    set_design_value,
    summarise_response,
)
from piezo.frontend.noise import noise_budget, noise_gain_midband, self_noise
from piezo.results import to_jsonable

__all__ = [
    "CAUTION",
    "DEFAULT_AT_HZ",
    "VARY_KEYS",
    "FrontendStudy",
    "design_document",
    "study_frontend",
    "vary_values",
]

CAUTION = (
    "Caution: piezo elements can produce high voltages under shock or temperature change; "
    "protect the amplifier input. These figures are an engineering estimate from the "
    "model: confirm them by measurement."
)

#: Frequencies of the phase table when none are given, hertz.
DEFAULT_AT_HZ = (1.0, 10.0, 100.0, 1000.0, 10000.0)

#: Figures kept in each row of a trade-off table.
VARY_KEYS = (
    "sensitivity_mv_per_pa",
    "corner_hz",
    "time_constant_s",
    "band_1db_hz",
    "self_noise_dba",
    "noise_gain_midband",
    "dynamic_range_db",
)

#: Most rows of a trade-off table.
MAX_VARY_ROWS = 50


def _band(band: tuple[float | None, float | None] | None) -> list[float | None] | None:
    return None if band is None else [band[0], band[1]]


#: Frequencies of the noise density table when no ``at_hz`` is given, Hz.
NOISE_TABLE_HZ = (1.0, 10.0, 100.0, 1000.0, 10000.0)


def _density_table(fe: Frontend, at_hz: Sequence[float]) -> dict[str, Any]:
    """Noise density per source and in total at ``at_hz``, at the output and the input."""
    budget = noise_budget(fe, np.asarray(at_hz, dtype=float))
    return {
        "frequency_hz": list(budget.frequency_hz),
        "sources": [
            {
                "source": key,
                "label": label,
                "output_v_per_sqrt_hz": list(np.sqrt(out)),
                "input_pa_per_sqrt_hz": list(np.sqrt(inp)),
            }
            for key, label, out, inp in zip(
                budget.keys,
                budget.labels,
                budget.output_psd_v2_per_hz,
                budget.input_psd_pa2_per_hz,
                strict=True,
            )
        ],
        "total_output_v_per_sqrt_hz": list(np.sqrt(budget.total_output_psd_v2_per_hz)),
        "total_input_pa_per_sqrt_hz": list(np.sqrt(budget.total_input_psd_pa2_per_hz)),
    }


def design_document(
    fe: Frontend,
    *,
    at_hz: Sequence[float] = (),
    noise_band_hz: tuple[float, float] = (20.0, 20000.0),
) -> dict[str, Any]:
    """Every figure of a design as plain JSON values (keys of ``piezo frontend --json``).

    ``noise_band_hz`` is the band of the self-noise (a hydrophone's or a vibration
    sensor's band differs from the audio band); the noise density table is given at
    ``at_hz`` (or :data:`NOISE_TABLE_HZ`).

    Examples
    --------
    >>> from piezo.demo.frontend import frontend_demo_texts
    >>> from piezo.frontend.model import frontend_from_mapping
    >>> import tomllib
    >>> text = frontend_demo_texts()["designs/pump-disc-charge.toml"]
    >>> fe = frontend_from_mapping(tomllib.loads(text))
    >>> doc = design_document(fe, at_hz=[100.0])
    >>> doc["amplifier"], len(doc["phase"])
    ('charge', 1)
    >>> doc["time_constant_s"] * 2 * 3.141592653589793 * doc["corner_hz"]  # τ = 1/(2π fc)
    1.0...
    """
    summary = summarise_response(fe, at_hz=tuple(at_hz))
    noise = self_noise(fe, band_hz=noise_band_hz)
    amp = fe.amplifier
    doc = {
        "name": fe.name,
        "amplifier": amp.kind,
        "sensitivity_mv_per_pa": 1e3 * summary.sensitivity_v_per_pa,
        "sensitivity_dbv_per_pa": summary.sensitivity_db_re_1v_per_pa,
        "charge_gain_mv_per_pc": summary.charge_gain_v_per_c * 1e-9,
        "inverting": summary.inverting,
        "divider_ratio": summary.divider_ratio,
        "corner_hz": summary.corner_hz,
        "time_constant_s": summary.time_constant_s,
        "band_1db_hz": _band(summary.band_1db_hz),
        "band_3db_hz": _band(summary.band_3db_hz),
        "phase": [
            {"frequency_hz": f, "level_db": level, "phase_deg": ph}
            for f, level, ph in zip(
                summary.at_hz, summary.relative_level_db, summary.phase_deg, strict=True
            )
        ],
        "noise_gain_midband": noise_gain_midband(fe),
        "self_noise_dba": noise.a_weighted_db_spl,
        "self_noise_unweighted_db": noise.unweighted_db_spl,
        "noise_band_hz": list(noise.band_hz),
        "output_noise_v_rms": noise.output_noise_v_rms,
        "noise_budget": [
            {
                "source": s.key,
                "label": s.label,
                "output_v_per_sqrt_hz": s.output_density_v_per_sqrt_hz,
                "input_pa_per_sqrt_hz": s.input_density_pa_per_sqrt_hz,
                "a_weighted_db": s.a_weighted_db_spl,
                "share": s.share,
            }
            for s in noise.sources
        ],
        "noise_reference_hz": noise.reference_hz,
        "noise_density": _density_table(fe, tuple(at_hz) or NOISE_TABLE_HZ),
        "clip_level_v": amp.clip_level_v,
        "max_spl_db": noise.max_spl_db,
        "dynamic_range_db": noise.dynamic_range_db,
        "temperature_k": fe.temperature_k,
        "caution": CAUTION,
    }
    return to_jsonable(doc)


def vary_values(name: str, low: str | float, high: str | float, count: int) -> np.ndarray:
    """``count`` values of design key ``name`` from ``low`` to ``high``, SI units.

    Log-spaced when both ends are positive, else evenly spaced. The ends may be text
    with units (``"100M"``, ``"1 nF"``), parsed as the design file's values are.

    Raises
    ------
    InputError
        Unknown or ambiguous key, values that do not parse, ``count`` outside 2 to 50.

    Examples
    --------
    >>> vary_values("feedback_resistance", "100M", "10G", 3)
    array([1.e+08, 1.e+09, 1.e+10])
    """
    resolve_design_key(name)
    lo = parse_design_value(name, low)
    hi = parse_design_value(name, high)
    if not 2 <= count <= MAX_VARY_ROWS:
        raise InputError(f"count: must be 2 to {MAX_VARY_ROWS}, got {count}")
    return np.geomspace(lo, hi, count) if lo > 0 and hi > 0 else np.linspace(lo, hi, count)


@dataclass(frozen=True)
class FrontendStudy:
    """A design's figures and, optionally, a trade-off table over one of its values.

    Attributes
    ----------
    design
        The design file, as it was read.
    frontend
        The model built from it.
    figures
        Every figure (:func:`design_document`), plain JSON values.
    vary_name
        The design key varied, or None.
    vary_rows
        One row per value: ``value`` and the figures of :data:`VARY_KEYS`.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from piezo.demo.frontend import frontend_demo_texts
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "buffer.toml"
    >>> _ = path.write_text(frontend_demo_texts()["designs/film-buffer-voltage.toml"])
    >>> study = study_frontend(path)
    >>> study.to_dict()["amplifier"], study.vary_name, "vary" in study.to_dict()
    ('voltage', None, False)
    """

    design: str
    frontend: Frontend
    figures: dict[str, Any]
    vary_name: str | None = None
    vary_rows: tuple[dict[str, Any], ...] = ()

    def to_dict(self) -> dict[str, Any]:
        """The ``piezo frontend --json`` document (without ``plot``)."""
        doc: dict[str, Any] = {"design": self.design, **self.figures}
        if self.vary_name is not None:
            doc["vary"] = {"name": self.vary_name, "rows": list(self.vary_rows)}
        return to_jsonable(doc)


def study_frontend(
    design: str | Path,
    *,
    at_hz: Sequence[float] = DEFAULT_AT_HZ,
    vary: tuple[str, Sequence[float] | np.ndarray] | None = None,
    noise_band_hz: tuple[float, float] = (20.0, 20000.0),
) -> FrontendStudy:
    """Model a front-end design file; with ``vary``, a trade-off table over one value.

    Parameters
    ----------
    design
        Design file (TOML, ``docs/frontend.md``).
    at_hz
        Frequencies of the level and phase table.
    vary
        ``(key, values)``: the design is rebuilt with each value of ``key`` (SI units,
        see :func:`vary_values`) and the figures of :data:`VARY_KEYS` tabulated.
    noise_band_hz
        Band of the self-noise, Hz.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from piezo.demo.frontend import frontend_demo_texts
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "charge.toml"
    >>> _ = path.write_text(frontend_demo_texts()["designs/pump-disc-charge.toml"])
    >>> study = study_frontend(path, vary=("feedback_resistance", [1e9, 1e10]))
    >>> corners = [row["corner_hz"] for row in study.vary_rows]
    >>> round(corners[0] / corners[1], 6)  # fc = 1/(2π Rf Cf): ten times Rf, a tenth fc
    10.0
    """
    data = read_design(design)
    source = str(design)
    fe = frontend_from_mapping(data, source=source)
    try:
        figures = design_document(fe, at_hz=at_hz, noise_band_hz=noise_band_hz)
    except InputError as exc:
        raise exc.with_source(source) from None
    if vary is None:
        return FrontendStudy(source, fe, figures)
    name, values = vary
    rows = []
    for value in values:
        varied = frontend_from_mapping(set_design_value(data, name, value), source=source)
        row = design_document(varied)
        rows.append({"value": float(value), **{k: row[k] for k in VARY_KEYS}})
    return FrontendStudy(source, fe, figures, name, tuple(rows))

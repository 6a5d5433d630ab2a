"""The report's JSON document, built from the result objects of one analysis run.

The HTML page is rendered from this document (and figures drawn from the same result
objects), so the page and the JSON file carry the same numbers.
"""

from __future__ import annotations

import math
import platform
from importlib import metadata
from typing import Any

from piezo import __version__
from piezo.chain import CalibratedSource
from piezo.units import format_quantity, ratio_to_db

__all__ = [
    "CAUTIONS",
    "REPORT_SCHEMA",
    "chain_section",
    "recording_section",
    "software_versions",
]

#: Identifier of the document layout (``docs/report.schema.json``).
REPORT_SCHEMA = "piezo-report/1"

#: Stated in every report, on the page and in the JSON.
CAUTIONS = (
    "An analysis of recordings is not a certified sound level meter measurement: the "
    "levels here are only as good as the recording chain and its calibration.",
    "Occupational noise assessments follow local regulations and use calibrated class 1 "
    "instruments; do not use this report for them.",
    "Piezoelectric elements can produce high voltages under shock or heat; protect the "
    "front-end inputs and handle sensors accordingly.",
)


def software_versions() -> dict[str, str]:
    """Versions of piezo, Python and the libraries that made the numbers."""
    versions = {"piezo": __version__, "python": platform.python_version()}
    for dist in ("numpy", "scipy", "soundfile", "matplotlib", "jinja2"):
        try:
            versions[dist] = metadata.version(dist)
        except metadata.PackageNotFoundError:
            versions[dist] = "not installed"
    return versions


def recording_section(source: CalibratedSource) -> dict[str, Any]:
    """What the recording is: file, format, rate, length, channels analysed."""
    rec = source.recording
    return {
        "file": str(rec.path),
        "name": rec.path.name,
        "format": rec.format,
        "subtype": rec.subtype,
        "sample_rate_hz": rec.sample_rate_hz,
        "frames": rec.frames,
        "duration_s": rec.duration_s,
        "channels_in_file": rec.channels,
        "channels": list(source.channel_indices),
        "channel_names": [rec.channel_names[c] for c in source.channel_indices],
        "is_pcm": rec.is_pcm,
    }


def _origin(text: str) -> str:
    if text == "default":
        return "default"
    if text == "option":
        return "command-line option"
    return f"profile {text}"


def chain_section(source: CalibratedSource) -> dict[str, Any]:
    """The measurement chain with the provenance of every value."""
    chain = source.chain
    prov = source.provenance.as_dict() if source.provenance else {}
    origin = {k: _origin(v) for k, v in prov.items()}
    rows = []
    if source.recording.is_pcm:
        rows.append(
            {
                "quantity": "ADC full scale",
                "value": format_quantity(chain.full_scale_v, "V"),
                "source": origin.get("full_scale_v", "default"),
            }
        )
    else:
        rows.append(
            {
                "quantity": "values",
                "value": "volts as exported (CSV)",
                "source": "file",
            }
        )
    rows.append(
        {
            "quantity": "gain between sensor and ADC",
            "value": f"{chain.gain:.6g} V/V ({ratio_to_db(chain.gain):.2f} dB)",
            "source": origin.get("gain", "default"),
        }
    )
    sens = chain.sensitivity_v_per_pa
    rows.append(
        {
            "quantity": "sensor sensitivity",
            "value": (
                "none: results in volts"
                if sens is None
                else f"{format_quantity(sens, 'V/Pa')} ({ratio_to_db(sens):.2f} dB re 1 V/Pa)"
            ),
            "source": origin.get("sensitivity_v_per_pa", "default"),
        }
    )
    rows.append(
        {
            "quantity": "level reference",
            "value": chain.level_unit,
            "source": origin.get("reference_pa", "default") if chain.calibrated else "volts",
        }
    )
    scale = source.scale
    rows.append(
        {
            "quantity": "raw sample to calibrated value",
            "value": f"× {scale:.6g} {chain.unit}",
            "source": "derived",
        }
    )
    profiles = []
    if source.provenance is not None:
        for p in source.provenance.profiles:
            profiles.append(
                {
                    "path": str(p.path),
                    "name": p.name,
                    "serial": p.serial,
                    "calibration_date": p.calibration_date,
                }
            )
    return {
        "unit": chain.unit,
        "level_unit": chain.level_unit,
        "reference": chain.reference,
        "calibrated": chain.calibrated,
        "full_scale_v": chain.full_scale_v,
        "gain": chain.gain,
        "sensitivity_v_per_pa": sens,
        "reference_pa": chain.reference_pa,
        "provenance": prov,
        "rows": rows,
        "profiles": profiles,
    }


def finite(value: float | None, digits: int | None = None) -> float | None:
    """A finite float (rounded to ``digits`` decimals) or None, for JSON."""
    if value is None:
        return None
    value = float(value)
    if not math.isfinite(value):
        return None
    return round(value, digits) if digits is not None else value

"""``piezo spectrum --transient``: energy spectral density and exposure levels of a capture.

Called by :mod:`piezo.cli.spectrum` when ``--transient`` is given.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from rich.table import Table

from piezo.chain.units import squared_unit
from piezo.cli.output import console, emit_json, print_heading, progress
from piezo.results import shared_value


def transient_view(file: Path, source: Any, *, json_out: bool, fraction: int = 3) -> None:
    """Print (or emit as JSON) the transient view of an opened source.

    Examples
    --------
    The exposure level of an event is 10·lg of its energy: 10·lg(1.4875e-4 V²·s) = -38.28 dB:

    >>> from pathlib import Path
    >>> import piezo
    >>> tap = Path("recordings/element-lot/tap/EL-29101.flac")
    >>> transient_view(tap, piezo.open(tap), json_out=True)
    {... "energy": 0.000148..., "exposure_level_db": -38.27..., ...}
    """
    from piezo.spectral.transient import TransientAnalyzer

    fs = source.sample_rate_hz
    nch = len(source.channel_indices)
    analyzer = TransientAnalyzer(fs, nch, fraction=fraction)
    with progress(f"Transient view of {file.name}", source.frames) as advance:
        for block in source.blocks():
            analyzer.update(block)
            advance(block.shape[0])
    r = analyzer.result()
    refs = source.references
    units = source.units
    # Each channel in its own unit: dB re (its reference)²·s (ISO 1683 references).
    exposure_units = [f"dB re ({c.level_unit.removeprefix('dB re ')})²·s" for c in source.chains]
    levels = r.exposure_level_db(refs)
    bands = r.band_exposure_level_db(refs)
    unit = shared_value(units)
    doc = {
        "file": str(file),
        "unit": unit,
        "exposure_unit": shared_value(exposure_units),
        "esd_unit": None if unit is None else f"{squared_unit(unit, caret=False)}·s/Hz",
        "sample_rate_hz": fs,
        "duration_s": r.duration_s,
        "resolution_hz": r.resolution_hz,
        "method": "ESD = 2|X(f)|² (Hann segments, 75 % overlap, zero-padded ends: Parseval "
        "exact); band exposures from IEC 61260-1 filters",
        "channels": [
            {
                "channel": ch,
                "unit": units[i],
                "exposure_unit": exposure_units[i],
                "esd_unit": f"{squared_unit(units[i], caret=False)}·s/Hz",
                "energy": float(r.energy[i]),
                "exposure_level_db": float(levels[i]),
                "band_nominal_hz": r.band_nominal_hz,
                "band_exposure_level_db": bands[:, i],
                "events": [
                    {
                        "start_s": e.start_s,
                        "duration_s": e.duration_s,
                        "peak": e.peak,
                        "energy": e.energy,
                        "exposure_level_db": _level(e.energy, float(refs[i])),
                        "rms": (e.energy / e.duration_s) ** 0.5 if e.duration_s > 0 else None,
                    }
                    for e in r.events[i]
                ],
                "frequency_hz": r.frequency_hz,
                "esd": r.esd[:, i],
            }
            for i, ch in enumerate(source.channel_indices)
        ],
    }
    if json_out:
        emit_json(doc)
        return
    print_heading(file, f"transient view, {r.duration_s:.4g} s")
    for entry in doc["channels"]:
        unit, exposure_unit = entry["unit"], entry["exposure_unit"]
        console.print(
            f"  channel {entry['channel']}: exposure {entry['exposure_level_db']:.2f} "
            f"{exposure_unit} ({entry['energy']:.4g} {squared_unit(unit, caret=False)}·s)"
        )
        if entry["events"]:
            table = Table(box=None, pad_edge=False, header_style="bold")
            for name in ("event start s", "duration s", f"RMS {unit}",
                         f"exposure {exposure_unit}"):  # fmt: skip
                table.add_column(name, justify="right")
            for e in entry["events"][:40]:
                table.add_row(
                    f"{e['start_s']:.4f}",
                    f"{e['duration_s']:.4f}",
                    "—" if e["rms"] is None else f"{e['rms']:.4g}",
                    f"{e['exposure_level_db']:.2f}",
                )
            console.print(table)
    console.print(f"  {doc['method']}")


def _level(energy: float, reference: float) -> float | None:
    import math

    return 10 * math.log10(energy / reference**2) if energy > 0 else None

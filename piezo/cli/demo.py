"""``piezo demo``: write the synthetic demo recordings."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import numpy as np
import soundfile as sf
import typer

from piezo.cli.output import atomic_output, console, write_text_atomic
from piezo.demo.element import element_lot_files
from piezo.demo.lot import lot_files
from piezo.demo.scenes import DemoFile, demo_files, demo_texts
from piezo.io.atomic import write_bytes_atomic


def register(app: typer.Typer) -> None:
    """Add the ``demo`` command to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [command.name for command in app.registered_commands]
    ['demo']
    """
    app.command("demo", help="Write the synthetic demo recordings and their profiles.")(demo)


def demo(
    out: Annotated[Path, typer.Option("--out", help="Folder to write into.")] = Path("demo"),
) -> None:
    """Write the demo recordings (seeded, identical on every run) into a folder.

    All data is synthetic: scenarios of our own, made to exercise every command.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from piezo.cli import main
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     try:
    ...         main(["demo", "--out", tmp])
    ...     except SystemExit as done:
    ...         print(done.code, (pathlib.Path(tmp) / "calibrator-94dB.wav").is_file())
    calibrator-94dB.wav film microphone on a 94 dB, 1 kHz calibrator ...
    0 True
    """
    out.mkdir(parents=True, exist_ok=True)
    files = demo_files()
    for item in files:
        _write_demo_file(out, item)
        console.print(f"  {item.name:<34} {item.description}")
    texts = demo_texts()
    for name, text in texts.items():
        write_text_atomic(out / name, text)
        console.print(f"  {name:<34} (text)")
    lot = lot_files()
    for lot_item in lot:
        with atomic_output(out / lot_item.name) as tmp:
            tmp.write_bytes(lot_item.payload())
    console.print(f"  {'pd27-*':<34} production lot: {len(lot)} files (captures, spec, golden)")
    elements = element_lot_files()
    for element_item in elements:
        (out / element_item.name).parent.mkdir(parents=True, exist_ok=True)
        write_bytes_atomic(out / element_item.name, element_item.data)
    console.print(f"  {'element-*':<34} element lot: {len(elements)} files (sweeps, taps, specs)")
    console.print(
        f"wrote {len(files)} recordings, {len(texts)} text files and the {len(lot)}-file "
        f"production lot to {out}"
    )


def _write_demo_file(out: Path, item: DemoFile) -> None:
    """Write one demo recording (and its sidecar) atomically."""
    target = out / item.name
    if item.subtype is None:
        assert item.header is not None
        with atomic_output(target) as tmp:
            np.savetxt(
                tmp,
                item.samples,
                delimiter=",",
                header=",".join(item.header),
                comments="",
                fmt="%.6g",
            )
    else:
        with atomic_output(target) as tmp:
            sf.write(str(tmp), item.samples, int(item.sample_rate_hz), subtype=item.subtype)
    if item.sidecar is not None:
        write_text_atomic(target.with_suffix(".toml"), item.sidecar)

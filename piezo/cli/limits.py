"""``piezo limits derive``: limits from golden (known-good) units."""

from __future__ import annotations

import functools
from pathlib import Path
from typing import Annotated

import typer
from rich.table import Table

from piezo.batch.derive import derive_limits, derived_spec_text
from piezo.batch.runner import evaluate_capture, expand_inputs, run_batch
from piezo.batch.spec import load_spec, parse_spec
from piezo.cli.options import JsonOption
from piezo.cli.output import (
    ForceOption,
    console,
    emit_json,
    err_console,
    progress,
    refuse_existing,
    write_text_atomic,
)
from piezo.errors import InputError

limits_app = typer.Typer(
    name="limits",
    help="Limit specs for batch checks: derive limits from golden units.",
    no_args_is_help=True,
)


def register(app: typer.Typer) -> None:
    """Add the ``limits`` command group to ``app``.

    Examples
    --------
    >>> import typer
    >>> app = typer.Typer()
    >>> register(app)
    >>> [group.name for group in app.registered_groups]
    ['limits']
    """
    app.add_typer(limits_app, name="limits")


@limits_app.command("derive")
def derive(
    golden: Annotated[
        list[str],
        typer.Argument(
            metavar="GOLDEN",
            help="Golden captures: files, directories (recursive) or glob patterns.",
            show_default=False,
        ),
    ],
    *,
    spec_path: Annotated[
        Path,
        typer.Option("--spec", help="Base spec: stimulus, chain, metrics (and mask frequencies)."),
    ],
    out: Annotated[Path, typer.Option("--out", help="Spec file to write.")],
    k: Annotated[float, typer.Option("--k", help="Fail limits at mean ± k·σ.")] = 3.0,
    warn_k: Annotated[
        float | None,
        typer.Option("--warn-k", help="Also a warning band at mean ± K·σ (K < k)."),
    ] = None,
    workers: Annotated[
        int | None,
        typer.Option("--workers", help="Local worker processes (default: all cores)."),
    ] = None,
    force: ForceOption = False,
    json_out: JsonOption = False,
) -> None:
    """Measure the base spec's metrics on golden captures and write a spec with limits
    at mean ± k·σ (σ: sample standard deviation), n, mean and σ stated in comments.

    Examples
    --------
    >>> from piezo.cli import main
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     try:
    ...         main(["limits", "derive", "recordings/pd27-golden/PD27-23001.flac",
    ...               "recordings/pd27-golden/PD27-23002.flac",
    ...               "recordings/pd27-golden/PD27-23003.flac",
    ...               "--spec", "recordings/pd27-spec.toml", "--out", f"{tmp}/spec.toml",
    ...               "--workers", "1", "--json"])
    ...     except SystemExit as done:
    ...         print(done.code)
    {... "captures": 3, "k": 3.0, ... "name": "sensitivity", "n": 3, ...}
    0
    """
    spec = load_spec(spec_path, for_derive=True)
    refuse_existing(out, force=force)
    if workers is not None and workers < 1:
        raise InputError(f"--workers: must be at least 1, got {workers}")
    # Checked before measuring anything (derive_limits checks them again).
    if not k > 0:
        raise InputError(f"--k: must be a positive number, got {k!r}")
    if warn_k is not None and not 0 < warn_k < k:
        raise InputError(f"--warn-k: must be between 0 and --k ({k:g}), got {warn_k!r}")
    files = expand_inputs(golden)
    job = functools.partial(evaluate_capture, spec=spec, with_curves=True)
    with progress(f"Measuring {len(files)} golden captures", len(files)) as advance:
        rows = run_batch(files, spec, workers=workers, job=job, on_row=lambda r, _: advance(1))
    derived, notes = derive_limits(rows, spec, k=k, warn_k=warn_k)
    text = derived_spec_text(
        spec,
        derived,
        notes,
        k=k,
        warn_k=warn_k,
        golden_source=", ".join(golden),
        base_source=str(spec_path),
        out_path=out,
    )
    parse_spec(text, source=str(out), base_dir=out.resolve().parent)  # must load back
    write_text_atomic(out, text)
    if json_out:
        emit_json(
            {
                "out": str(out),
                "captures": len(rows),
                "k": k,
                "warn_k": warn_k,
                "notes": notes,
                "metrics": [
                    {
                        "name": d.name,
                        "n": d.n,
                        "mean": d.mean,
                        "std": d.std,
                        "lower": d.lower,
                        "upper": d.upper,
                        "copied": d.copied,
                    }
                    for d in derived
                ],
            }
        )
        return
    for note in notes:
        err_console.print(f"piezo: warning: {note}")
    table = Table(box=None, pad_edge=False, header_style="bold")
    for col, justify in (
        ("metric", "left"),
        ("n", "right"),
        ("mean", "right"),
        ("σ", "right"),
        ("lower", "right"),
        ("upper", "right"),
    ):
        table.add_column(col, justify=justify)  # type: ignore[arg-type]
    units = {m.name: m.unit for m in spec.metrics}
    for d in derived:
        if d.copied:
            table.add_row(d.name, "—", "—", "—", "(kept)", "(kept)")
        elif isinstance(d.mean, list):
            table.add_row(
                f"{d.name} (mask, {len(d.mean)} points)", str(d.n), "per frequency", "", "", ""
            )
        else:
            table.add_row(
                f"{d.name} ({units[d.name]})",
                str(d.n),
                f"{d.mean:.4g}",
                f"{d.std:.3g}",
                "—" if d.lower is None else f"{d.lower:.4g}",
                "—" if d.upper is None else f"{d.upper:.4g}",
            )
    console.print(table)
    console.print(f"wrote {out} (limits at mean ± {k:g}·σ from {len(rows)} golden captures)")

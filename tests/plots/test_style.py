"""One plot style (piezo.plots.style) on every figure piezo draws; matplotlib stays lazy.

Each figure function of piezo/plots is called on small synthetic data; the Figure objects
it renders are captured (``capture_figures``) and inspected: one font family and the
style's sizes, colours from the palette, images in the one colour map, every axis label
in the one form "quantity / unit", fixed rendering metadata.
"""

from __future__ import annotations

import ast
import importlib
import inspect
import os
import re
import subprocess
import sys

import numpy as np
import pytest
import soundfile as sf

from piezo.plots import style
from tests.paths import RECORDINGS, REPO

FS = 48000

#: Modules of piezo/plots that hold figures (style is the style; element is drawn by the
#: element's engineer and tested with it).
FIGURE_MODULES = ("figures", "spectrum", "response", "frontend", "batch", "element")


# ---------------------------------------------------------------------------------------
# Inputs: small synthetic analyses.


@pytest.fixture(scope="module")
def run(tmp_path_factory):
    """A report run on a 2-s, 2-channel capture (noise and a tone), with a front-end."""
    from piezo.chain.measurement import CalibratedSource, ChainSettings, resolve_chain
    from piezo.io.reader import open_recording
    from piezo.report.run import ReportSettings, analyse

    path = tmp_path_factory.mktemp("capture") / "two.wav"
    rng = np.random.default_rng(7)
    t = np.arange(2 * FS) / FS
    x = np.column_stack([0.1 * rng.standard_normal(t.size), 0.3 * np.sin(2 * np.pi * 997 * t)])
    sf.write(str(path), x, FS, subtype="PCM_24")
    chain, provenance = resolve_chain(path, ChainSettings(), use_sidecar=False)
    source = CalibratedSource.of(open_recording(path), chain, None, provenance)
    settings = ReportSettings(frontend_design=RECORDINGS / "designs" / "pump-disc-charge.toml")
    return analyse(source, settings)


def _report_cases(run):
    from piezo.plots import figures

    ch = run.source.channel_indices
    chains = run.source.chains
    lu = chains[0].level_unit
    return {
        ("figures", "rolloff_figure"): lambda: figures.rolloff_figure(
            run.diagnostics.channels[0], lu
        ),
        ("figures", "level_history_figure"): lambda: figures.level_history_figure(run.levels),
        ("figures", "frontend_figure"): lambda: figures.frontend_figure(run.frontend),
        ("figures", "psd_figure"): lambda: figures.psd_figure(run.psd, list(ch), chains),
        ("figures", "bands_figure"): lambda: figures.bands_figure(run.bands, list(ch), chains),
        ("figures", "spectrogram_figure"): lambda: figures.spectrogram_figure(
            run.spectrogram, 0, ch[0], chains[0]
        ),
    }


def _cli_cases(tmp_path):
    from piezo.frontend.model import load_frontend
    from piezo.plots import frontend, response, spectrum
    from piezo.response.fit import ResponseTable
    from piezo.spectral.welch import Spectrogram, WelchPSD

    rng = np.random.default_rng(3)
    block = rng.standard_normal((FS, 2))
    psd = WelchPSD(FS, 2, segment_frames=1024)
    sg = Spectrogram(FS, 2, segment_frames=512)
    psd.update(block)
    sg.update(block)
    f = np.geomspace(20.0, 20e3, 200)
    mag = -40.0 - 10 * np.log10(1 + (40.0 / f) ** 2)
    extra = {"coherence": np.full(f.size, 0.99), "thd_percent": np.full(f.size, 0.1)}
    table = ResponseTable(f, mag, np.degrees(np.arctan(40.0 / f)), "dB re 1 V/Pa", extra)
    fe = load_frontend(RECORDINGS / "designs" / "film-buffer-voltage.toml")
    args = ("x.wav", "dB re (1 V)²/Hz", 1.0)
    return {
        ("spectrum", "spectrum_figure"): lambda: style.png_bytes(
            spectrum.spectrum_figure(psd.result(), sg, (0, 1), *args)
        ),
        ("spectrum", "write_plot"): lambda: spectrum.write_plot(
            tmp_path / "s.png", psd.result(), sg, (0, 1), *args
        ),
        ("response", "response_figure"): lambda: style.png_bytes(
            response.response_figure(
                table, title="unit A", smooth=6, golden=table, lower="coherence"
            )
        ),
        ("response", "write_plot"): lambda: response.write_plot(
            tmp_path / "r.png", table, title="unit A", smooth=0
        ),
        ("frontend", "frontend_design_figure"): lambda: style.png_bytes(
            frontend.frontend_design_figure(fe, title="film buffer")
        ),
        ("frontend", "write_plot"): lambda: frontend.write_plot(
            fe, tmp_path / "f.svg", title="film buffer"
        ),
    }


def _batch_cases():
    from piezo.batch.outputs import summarize
    from piezo.batch.spec import load_spec
    from piezo.plots import batch

    spec = load_spec(RECORDINGS / "pd27-spec.toml")
    rng = np.random.default_rng(5)
    names = [m.name for m in spec.metrics]
    rows = [
        {
            "verdict": "pass",
            "metrics": dict(zip(names, map(float, rng.normal(size=len(names))), strict=True)),
        }
        for _ in range(30)
    ]
    for row in rows:
        row["metrics"]["sensitivity"] = -41.5 + row["metrics"]["sensitivity"]
    summary = summarize(rows, spec)
    golden = next(m for m in spec.metrics if m.kind == "golden_deviation")
    data = golden.params["golden_data"]
    response = {"frequency_hz": data["frequency_hz"], "magnitude_db": data["magnitude_db"]}
    return {
        ("batch", "histogram_figure"): lambda: batch.histogram_figure(
            summary["metrics"][0], spec.metrics[0]
        ),
        ("batch", "response_figure"): lambda: batch.response_figure(
            {**response, "unit": "dB re 1 V/Pa"}, spec
        ),
    }


def _element_cases():
    from piezo.element.bvd import BvdCircuit, analyse_impedance
    from piezo.element.impedance import ImpedanceSweep
    from piezo.plots import element

    c = BvdCircuit(2.2e-9, 35.0, 0.12, 0.25e-9)
    f = np.linspace(27e3, 33e3, 601)
    analysis = analyse_impedance(ImpedanceSweep(f, c.impedance(f)))
    return {("element", "impedance_figure"): lambda: element.impedance_figure(analysis, "disc")}


@pytest.fixture(scope="module")
def cases(run, tmp_path_factory):
    tmp = tmp_path_factory.mktemp("figures")
    return {**_report_cases(run), **_cli_cases(tmp), **_batch_cases(), **_element_cases()}


@pytest.fixture(scope="module")
def drawn(cases):
    """Every case's rendered Figure objects."""
    out = {}
    for key, call in cases.items():
        with style.capture_figures() as figs:
            call()
        out[key] = list(figs)
    return out


# ---------------------------------------------------------------------------------------
# Every figure function is covered.


def test_every_figure_function_is_checked(cases):
    found = set()
    for name in FIGURE_MODULES:
        module = importlib.import_module(f"piezo.plots.{name}")
        for fn_name, fn in inspect.getmembers(module, inspect.isfunction):
            if fn.__module__ != module.__name__ or fn_name.startswith("_"):
                continue
            if fn_name.endswith("_figure") or fn_name == "write_plot":
                found.add((name, fn_name))
    assert found  # the scan itself finds the figure functions
    assert found == set(cases)


def test_each_figure_function_renders_a_figure(drawn):
    for key, figs in drawn.items():
        assert len(figs) == 1, key


# ---------------------------------------------------------------------------------------
# The style on the produced figures.


def _texts(fig):
    from matplotlib.text import Text

    return [t for t in fig.findobj(Text) if t.get_text().strip() and t.get_visible()]


def test_one_font_family_and_the_style_sizes(drawn):
    sizes = set(style.FONT_SIZES.values())
    for key, (fig,) in drawn.items():
        for text in _texts(fig):
            assert text.get_fontname() == style.FONT_FAMILY, (key, text.get_text())
            assert text.get_fontsize() in sizes, (key, text.get_text(), text.get_fontsize())


# The one label form: "quantity / unit" (ISO 80000-1:2009, 7.1); the parenthesised form
# "quantity (unit)" is the one refused. A count carries no unit.
_PAREN_UNIT = re.compile(r"\((Hz|s|dB|°|degrees?|%|V|Pa|µPa)\)$")


def _axis_labels(fig):
    for ax in fig.axes:
        for label in (ax.get_xlabel(), ax.get_ylabel()):
            if label:
                yield label


def test_every_axis_label_has_the_one_form(drawn):
    for key, (fig,) in drawn.items():
        labels = list(_axis_labels(fig))
        assert labels, key
        for label in labels:
            assert " / " in label or label.startswith("number of "), (key, label)
            assert not _PAREN_UNIT.search(label), (key, label)


def test_label_form_refuses_the_other_form():
    # The check above is not a rubber stamp.
    assert _PAREN_UNIT.search("frequency (Hz)")
    assert " / " not in "level (dB)"


def test_colours_come_from_the_palette_and_images_use_the_colour_map(drawn):
    from matplotlib.collections import QuadMesh
    from matplotlib.colors import to_hex, to_rgba_array
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    def ok(colour) -> bool:  # transparent, or a palette colour
        return all(c[3] == 0 or to_hex(c) in style.PALETTE for c in to_rgba_array(colour))

    imaged = set()
    for key, (fig,) in drawn.items():
        for line in fig.findobj(Line2D):
            assert ok(line.get_color()), (key, line.get_label(), line.get_color())
        for patch in fig.findobj(Patch):
            assert ok(patch.get_facecolor()), (key, patch, patch.get_facecolor())
        for mesh in fig.findobj(QuadMesh):
            assert mesh.get_cmap().name == style.COLORMAP, key
            imaged.add(key)
    # The report's spectrogram and the spectrum command's (figure and file) are images.
    assert imaged == {
        ("figures", "spectrogram_figure"),
        ("spectrum", "spectrum_figure"),
        ("spectrum", "write_plot"),
    }


def test_grid_is_the_style_grid(drawn):
    from matplotlib.colors import to_hex

    for key, (fig,) in drawn.items():
        for ax in fig.axes:
            for line in ax.get_xgridlines() + ax.get_ygridlines():
                if line.get_visible():
                    assert to_hex(line.get_color()) == style.RULE, key


# ---------------------------------------------------------------------------------------
# Deterministic output.


def test_renders_are_byte_identical_and_carry_no_date(cases, tmp_path):
    for key in (("figures", "psd_figure"), ("batch", "histogram_figure")):
        assert cases[key]() == cases[key](), key
    with style.plot_style():
        fig, ax = style.figure()
        ax.plot([1, 2, 3], **style.trace(0))
    style.save_figure(fig, tmp_path / "a.svg")
    style.save_figure(fig, tmp_path / "b.svg")
    svg = (tmp_path / "a.svg").read_bytes()
    assert svg == (tmp_path / "b.svg").read_bytes()
    assert b"<dc:date>" not in svg
    png = style.png_bytes(fig)
    assert b"tIME" not in png and b"Software" not in png


# ---------------------------------------------------------------------------------------
# matplotlib only in piezo/plots, and only when a figure is drawn.


def _imports(tree: ast.AST):
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            yield node, [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module:
            yield node, [node.module]


def test_no_module_outside_plots_imports_matplotlib():
    offenders = []
    for path in sorted((REPO / "piezo").rglob("*.py")):
        rel = path.relative_to(REPO).as_posix()
        if rel.startswith("piezo/plots/"):
            continue
        for node, names in _imports(ast.parse(path.read_text(encoding="utf-8"))):
            if any(n == "matplotlib" or n.startswith("matplotlib.") for n in names):
                offenders.append(f"{rel}:{node.lineno}")
    assert offenders == []


def test_plots_import_matplotlib_only_inside_functions():
    for path in sorted((REPO / "piezo" / "plots").glob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in tree.body:  # module level (TYPE_CHECKING blocks are not run)
            if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
                continue
            if not isinstance(node, ast.Import | ast.ImportFrom):
                continue
            for _, names in _imports(node):
                assert not any(n.startswith("matplotlib") for n in names), path.name


def test_commands_that_draw_nothing_do_not_load_matplotlib(tmp_path):
    wav = tmp_path / "quiet.wav"
    sf.write(str(wav), 0.01 * np.sin(2 * np.pi * 1000 * np.arange(FS) / FS), FS)
    code = f"""
import sys
import piezo.plots.figures, piezo.plots.spectrum, piezo.plots.response
import piezo.plots.frontend, piezo.plots.batch, piezo.batch.outputs, piezo.report
from piezo.cli import main
try:
    main(["levels", {str(wav)!r}, "--json"])
except SystemExit as exc:
    assert exc.code in (0, None), exc.code
print("matplotlib" in sys.modules, file=sys.stderr)
"""
    done = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        cwd=tmp_path,
        env={**os.environ, "PYTHONPATH": str(REPO)},
        timeout=300,
    )
    assert done.returncode == 0, done.stderr
    assert done.stderr.strip().splitlines()[-1] == "False"

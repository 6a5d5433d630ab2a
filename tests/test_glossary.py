"""Every output name of every command is in docs/glossary.md.

Runs each command with ``--json`` on the bundled recordings (short ones, a few captures of
a lot), reads the report's and the batch's JSON files and the CSV tables, and checks each
key and column name against the names the glossary's tables list.
"""

from __future__ import annotations

import csv
import io
import json
import re
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from tests.paths import DOCS, RECORDINGS

GLOSSARY = DOCS / "glossary.md"

#: Placeholders that stand for a number in a pattern name (channel, percentile, ...).
NUMBER_PLACEHOLDERS = {"N", "p", "f", "k"}


class Glossary:
    """The names of docs/glossary.md's tables: plain names, number patterns, keyed maps."""

    def __init__(self, text: str) -> None:
        self.names: set[str] = set()
        self.patterns: list[re.Pattern[str]] = []
        self.keyed_maps: set[str] = set()  # ``parent.<x>``: keys under parent are data
        self.data_columns = False  # ``<metric>``: results.csv has one column per metric
        for line in text.splitlines():
            if not line.startswith("| `"):
                continue
            first_cell = line.split(" | ", 1)[0]
            for name in re.findall(r"`([^`]+)`", first_cell):
                self._add(name)

    def _add(self, name: str) -> None:
        holders = re.findall(r"<([^>]+)>", name)
        if not holders:
            self.names.add(name)
        elif re.fullmatch(r"[A-Za-z_0-9]+\.<[^>]+>", name):
            self.keyed_maps.add(name.split(".", 1)[0])
        elif name == "<metric>":
            self.data_columns = True
        else:
            regex = ""
            for part in re.split(r"(<[^>]+>)", name):
                if part.startswith("<"):
                    regex += r"\d+" if part[1:-1] in NUMBER_PLACEHOLDERS else r"[^,]+"
                else:
                    regex += re.escape(part)
            self.patterns.append(re.compile(regex))

    def __contains__(self, name: object) -> bool:
        return isinstance(name, str) and (
            name in self.names or any(p.fullmatch(name) for p in self.patterns)
        )


@pytest.fixture(scope="module")
def glossary() -> Glossary:
    return Glossary(GLOSSARY.read_text(encoding="utf-8"))


def missing_keys(doc: Any, glossary: Glossary) -> list[str]:
    missing = []
    for key, path in _walk(doc, "", glossary):
        if key not in glossary:
            missing.append(f"{path}.{key}")
    return sorted(set(missing))


def _walk(doc: Any, path: str, glossary: Glossary) -> Iterator[tuple[str, str]]:
    if isinstance(doc, dict):
        for key, value in doc.items():
            yield key, path
            if key in glossary.keyed_maps and isinstance(value, dict):
                continue  # data keys (metric names, test frequencies)
            yield from _walk(value, f"{path}.{key}", glossary)
    elif isinstance(doc, list):
        for item in doc:
            yield from _walk(item, f"{path}[]", glossary)


def test_glossary_parser_reads_names_patterns_and_maps(glossary):
    assert {"LAeq", "sample_rate_hz", "reference_pa", "not evaluable"} <= glossary.names
    assert "LAF10" in glossary and "LAF99" in glossary and "LAFxx" not in glossary
    assert "thd_percent_at" in glossary.keyed_maps
    assert glossary.data_columns


def test_a_missing_key_is_found(glossary):
    doc = {"channels": [{"LAeq": 1.0, "no_such_key_db": 2.0}], "thd_percent_at": {"100": 1}}
    assert missing_keys(doc, glossary) == [".channels[].no_such_key_db"]


R = RECORDINGS
TMP = "{tmp}"

#: Each command with fast inputs; ``{tmp}`` is replaced by a fresh folder.
COMMANDS: dict[str, list[str]] = {
    "info": ["info", f"{R}/pump-bench.flac"],
    "calibrate": ["calibrate", f"{R}/calibrator-94dB.wav"],
    "levels": ["levels", f"{R}/pump-bench.flac", "--interval", "1s"],
    "spectrum": ["spectrum", f"{R}/tank-hydrophone.flac"],
    "spectrum-transient": ["spectrum", f"{R}/tap-test.csv", "--transient"],
    "bands": ["bands", f"{R}/tank-hydrophone.flac", "--fraction", "3"],
    "tone": ["tone", f"{R}/calibrator-94dB.wav", "--sensitivity", "8.5 mV/Pa"],
    "sweep-analyze": [
        "sweep", "analyze", f"{R}/valve-pickup-high-corner.flac",
        "--stimulus", f"{R}/valve-pickup-sweep.stimulus.toml",
        "--golden", f"{R}/valve-pickup-golden.csv",
    ],
    "sweep-make": [
        "sweep", "make", "--from", "20Hz", "--to", "20kHz", "--duration", "0.5s",
        "--rate", "48000", "--out", f"{TMP}/sweep.wav",
    ],
    "sweep-noise": [
        "sweep", "noise", "--kind", "pink", "--duration", "0.5s", "--rate", "48000",
        "--out", f"{TMP}/noise.wav",
    ],
    "response": ["response", f"{R}/valve-pickup-noise-2ch.flac", "--reference-channel", "0"],
    "fit-frontend": ["fit-frontend", f"{R}/valve-pickup-golden.csv"],
    "frontend": [
        "frontend", f"{R}/designs/pump-disc-charge.toml",
        "--vary", "feedback_resistance=100M:10G:3",
    ],
    "simulate": [
        "simulate", f"{R}/calibrator-94dB.wav", "--sensitivity", "8.5 mV/Pa",
        "--frontend", f"{R}/designs/pump-disc-charge.toml", "--out", f"{TMP}/sim.wav",
    ],
    "equalize": [
        "equalize", f"{R}/calibrator-94dB.wav",
        "--frontend", f"{R}/designs/film-buffer-voltage.toml", "--corner", "0.5Hz",
        "--out", f"{TMP}/eq.wav",
    ],
    "check": ["check", f"{R}/pump-bench.flac"],
    "impedance": ["impedance", f"{R}/element-lot/impedance/EL-29101.csv"],
    "ringdown": ["ringdown", f"{R}/tap-test.csv"],
    "report": ["report", f"{R}/calibrator-94dB.wav", "--out", f"{TMP}/report"],
    "limits-derive": [
        "limits", "derive", f"{R}/pd27-golden", "--spec", f"{R}/pd27-spec.toml",
        "--out", f"{TMP}/derived.toml", "--k", "3",
    ],
}  # fmt: skip

#: Lots for batch: a passing and a failing capture of each.
LOTS = {
    "pd27": ("pd27-lot", "pd27-spec.toml", ["PD27-24101.flac", "PD27-24107.flac"]),
    "tap": ("element-lot/tap", "element-tap-spec.toml", ["EL-29101.flac", "EL-29104.flac"]),
    "impedance": (
        "element-lot/impedance",
        "element-impedance-spec.toml",
        ["EL-29101.csv", "EL-29104.csv"],
    ),
}


def run_json(cli, args: list[str], tmp_path: Path) -> Any:
    result = cli(*(a.replace(TMP, str(tmp_path)) for a in args), "--json")
    assert result.code in (0, 1), result.err
    return result.json()


@pytest.mark.parametrize("command", sorted(COMMANDS))
def test_every_json_key_is_in_the_glossary(cli, tmp_path, glossary, command):
    doc = run_json(cli, COMMANDS[command], tmp_path)
    assert missing_keys(doc, glossary) == [], f"piezo {command} --json"
    if command == "report":  # the report's own JSON file
        (report_json,) = (tmp_path / "report").glob("*.report.json")
        written = json.loads(report_json.read_text(encoding="utf-8"))
        assert missing_keys(written, glossary) == [], report_json.name


@pytest.mark.parametrize("lot", sorted(LOTS))
def test_batch_json_and_results_csv_names_are_in_the_glossary(cli, tmp_path, glossary, lot):
    folder, spec, names = LOTS[lot]
    captures = tmp_path / "captures"
    captures.mkdir()
    for name in names:
        shutil.copy(RECORDINGS / folder / name, captures / name)
    out = tmp_path / "out"
    doc = run_json(
        cli,
        ["batch", str(captures), "--spec", str(RECORDINGS / spec), "--out", str(out)],
        tmp_path,
    )
    assert missing_keys(doc, glossary) == [], "piezo batch --json"
    results = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert missing_keys(results, glossary) == [], "results.json"
    metric_names = {m["name"] for m in results["metrics"]}
    header = csv_header((out / "results.csv").read_text(encoding="utf-8"))
    assert glossary.data_columns
    assert [c for c in header if c not in glossary and c not in metric_names] == []


def csv_header(text: str) -> list[str]:
    """The header row of a piezo CSV table (after its ``#`` comment lines)."""
    lines = [ln for ln in text.splitlines() if not ln.startswith("#")]
    return next(csv.reader(io.StringIO(lines[0])))


#: Commands that write a CSV table with ``--csv``.
CSV_COMMANDS: dict[str, list[str]] = {
    "spectrum": ["spectrum", f"{R}/tank-hydrophone.flac"],
    "bands": ["bands", f"{R}/tank-hydrophone.flac", "--fraction", "3"],
    "bands-interval": ["bands", f"{R}/pump-bench.flac", "--fraction", "1", "--interval", "1s"],
    "response": ["response", f"{R}/valve-pickup-noise-2ch.flac", "--reference-channel", "0"],
    "sweep-analyze": [
        "sweep", "analyze", f"{R}/valve-pickup-high-corner.flac",
        "--stimulus", f"{R}/valve-pickup-sweep.stimulus.toml",
    ],
}  # fmt: skip


@pytest.mark.parametrize("command", sorted(CSV_COMMANDS))
def test_every_csv_column_is_in_the_glossary(cli, tmp_path, glossary, command):
    out = tmp_path / "table.csv"
    result = cli(*CSV_COMMANDS[command], "--csv", out)
    assert result.code == 0, result.err
    header = csv_header(out.read_text(encoding="utf-8"))
    assert [c for c in header if c not in glossary] == []


def test_level_rows_in_one_order_on_the_terminal_in_json_and_in_the_report(cli, tmp_path):
    wav = RECORDINGS / "calibrator-94dB.wav"
    doc = cli("levels", wav, "--json").json()
    json_order = [k for k in doc["channels"][0] if k.startswith("L")]
    terminal = cli("levels", wav).out.splitlines()
    terminal_order = [
        ln.split()[0] for ln in terminal if ln.split()[:1] in ([k] for k in json_order)
    ]
    assert cli("report", wav, "--out", tmp_path).code == 0
    (report_json,) = tmp_path.glob("*.report.json")
    report = json.loads(report_json.read_text(encoding="utf-8"))
    # The terminal leaves out rows no channel has (the S minima of a 1-s capture).
    shown = [k for k in json_order if any(ch[k] is not None for ch in doc["channels"])]
    assert len(shown) < len(json_order)
    assert terminal_order == shown
    assert json_order == report["levels"]["names"]


@pytest.mark.parametrize(
    "args",
    [
        ["calibrate", f"{R}/calibrator-94dB.wav"],
        ["frontend", f"{R}/designs/pump-disc-charge.toml"],
    ],
    ids=["calibrate", "frontend"],
)
def test_sensitivity_levels_print_as_db_re_1_v_per_pa(cli, args):
    out = cli(*args).out
    assert "dB re 1 V/Pa" in out and "dBV/Pa" not in out

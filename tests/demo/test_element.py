"""The element lot in recordings/ is what the seeded generator makes, and batch judges it."""

from __future__ import annotations

import pytest

from piezo.batch.runner import evaluate_capture, expand_inputs
from piezo.batch.spec import load_spec
from piezo.demo.element import ELEMENT_FAULTS, element_lot_files
from tests.paths import RECORDINGS

FILES = element_lot_files()


@pytest.mark.parametrize("item", FILES, ids=[f.name for f in FILES])
def test_committed_files_match_generator(item):
    path = RECORDINGS / item.name
    assert path.exists(), f"run: piezo demo --out recordings ({item.name} missing)"
    assert path.read_bytes() == item.data


def test_generator_is_deterministic():
    assert [f.data for f in element_lot_files()] == [f.data for f in FILES]


def test_lot_stays_small():
    total = sum(len(f.data) for f in FILES)
    assert total < 400e3, f"the element lot holds {total / 1e3:.0f} kB"


@pytest.mark.parametrize(
    ("spec", "folder"),
    [("element-impedance-spec.toml", "impedance"), ("element-tap-spec.toml", "tap")],
)
def test_batch_verdicts_fail_exactly_the_seeded_faults(spec, folder):
    s = load_spec(RECORDINGS / spec)
    rows = [
        evaluate_capture(p, s) for p in expand_inputs([str(RECORDINGS / "element-lot" / folder)])
    ]
    verdicts = {r["serial"]: r["verdict"] for r in rows}
    assert len(verdicts) == 8
    failed = {serial for serial, v in verdicts.items() if v == "fail"}
    assert failed == set(ELEMENT_FAULTS)
    assert all(v == "pass" for serial, v in verdicts.items() if serial not in failed)
    cracked = next(r for r in rows if r["serial"] == "29104")
    modes = "modes" if folder == "impedance" else "ring_modes"
    assert cracked["metrics"][modes] == 2

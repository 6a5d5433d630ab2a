"""Quantities, level references and sensitivities in trade forms (piezo.chain.quantity)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from piezo.chain.quantity import (
    QUANTITIES,
    STANDARD_GRAVITY_M_PER_S2,
    Sensitivity,
    compact_sensitivity,
    format_sensitivity,
    parse_level_of,
    parse_sensitivity_of,
    quantity_named,
)
from piezo.errors import UnitError


def test_level_references_are_those_of_iso_1683():
    # ISO 1683:2015, Table 1: 20 µPa (gases) and 1 µPa (liquids), 1 µm/s², 1 nm/s, 1 pm,
    # 1 µN. Exact values, so exact comparison.
    assert QUANTITIES["pressure"].reference == 20e-6
    assert QUANTITIES["pressure"].level_reference(in_water=True) == 1e-6
    assert QUANTITIES["acceleration"].reference == 1e-6
    assert QUANTITIES["velocity"].reference == 1e-9
    assert QUANTITIES["displacement"].reference == 1e-12
    assert QUANTITIES["force"].reference == 1e-6
    assert QUANTITIES["pressure"].level_label(in_water=True) == "dB re 1 µPa"


def test_standard_gravity_is_exact():
    # 3rd CGPM (1901) and ISO 80000-3:2019: g_n = 9.80665 m/s², exact by definition.
    assert STANDARD_GRAVITY_M_PER_S2 == 9.80665
    s = parse_sensitivity_of("9.80665 mV/g")
    assert s.value == pytest.approx(1e-3, rel=1e-15)  # 1 mV/(m/s²), rounding only


@pytest.mark.parametrize(
    ("text", "quantity", "electrical", "value"),
    [
        # Values worked by hand from the unit definitions (SI prefixes; dB re 1 V/unit
        # means 20 lg of the ratio, IEC 60050-801 level convention).
        ("12 mV/Pa", "pressure", "V", 0.012),
        ("-38 dB re 1 V/Pa", "pressure", "V", 10 ** (-38 / 20)),
        ("-38 dBV/Pa", "pressure", "V", 10 ** (-38 / 20)),
        ("-196 dB re 1 V/µPa", "pressure", "V", 10 ** (-196 / 20) * 1e6),
        ("10 mV/g", "acceleration", "V", 0.01 / 9.80665),
        ("1.04 mV/(m/s²)", "acceleration", "V", 1.04e-3),
        ("1.04 mV/(m/s^2)", "acceleration", "V", 1.04e-3),
        ("0.5 pC/(m/s²)", "acceleration", "C", 0.5e-12),
        ("4.9 pC/g", "acceleration", "C", 4.9e-12 / 9.80665),
        ("4 pC/N", "force", "C", 4e-12),
        ("2.2 mV/N", "force", "V", 2.2e-3),
        ("100 mV/(mm/s)", "velocity", "V", 100.0),
        ("8 mV/µm", "displacement", "V", 8e3),
    ],
)
def test_trade_forms(text, quantity, electrical, value):
    s = parse_sensitivity_of(text)
    assert s.quantity.name == quantity
    assert s.electrical == electrical
    # Floating point of a product of two decimal factors: a few ulp.
    assert s.value == pytest.approx(value, rel=1e-12)


def test_hydrophone_level_form_in_mv_per_pa():
    # -196 dB re 1 V/µPa = 10^(-9.8) V/µPa = 0.15849 mV/Pa (arithmetic).
    assert parse_sensitivity_of("-196 dB re 1 V/µPa").value * 1e3 == pytest.approx(
        0.158489, rel=1e-5
    )


@pytest.mark.parametrize(
    "text", ["12 mV", "mV/Pa", "12 mV/furlong", "12 A/Pa", "-3 mV/Pa", "0 pC/N", "1e400 mV/g"]
)
def test_refused_forms_say_what_is_accepted(text):
    with pytest.raises(UnitError, match="sensitivity"):
        parse_sensitivity_of(text)


def test_quantity_mismatch_and_unknown_names():
    with pytest.raises(UnitError, match="is a pressure sensitivity, not acceleration"):
        parse_sensitivity_of("12 mV/Pa", quantity="acceleration")
    with pytest.raises(UnitError, match="unknown quantity 'speed'"):
        quantity_named("speed")
    assert quantity_named(" Force ").name == "force"


def test_weightings_apply_to_sound_pressure_only():
    assert [q.name for q in QUANTITIES.values() if q.weightable] == ["pressure"]


def test_charge_sensitivity_needs_the_amplifier_gain():
    s = parse_sensitivity_of("4 pC/N")
    assert s.volts_per_unit(1e9) == pytest.approx(4e-3)  # 4 pC/N × 1 mV/pC
    with pytest.raises(UnitError, match="charge amplifier's gain"):
        s.volts_per_unit()


@given(
    value=st.floats(min_value=1e-6, max_value=1e6, allow_nan=False),
    key=st.sampled_from(
        [("V", "pressure"), ("C", "acceleration"), ("V", "force"), ("V", "velocity")]
    ),
)
def test_format_then_parse_round_trips(value, key):
    # Property: the printed trade form reads back to the same sensitivity within its
    # printed precision (6 significant digits: relative 5e-6 at worst).
    electrical, name = key
    s = Sensitivity(value * (1e-3 if electrical == "V" else 1e-12), electrical, QUANTITIES[name])
    text = format_sensitivity(s, digits=6).split(" (")[0]
    back = parse_sensitivity_of(text)
    assert back.quantity == s.quantity and back.electrical == s.electrical
    assert math.isclose(back.value, s.value, rel_tol=5e-6)


# --- calibrator levels ------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "value", "quantity"),
    [
        # ISO 1683:2015 references: 140 dB re 1 µm/s² is 10 m/s², 114 dB re 20 µPa is
        # 10.024 Pa, 140 dB re 1 µN is 10 N (arithmetic on the references).
        ("140 dB re 1 µm/s²", 10.0, "acceleration"),
        ("140 dB re 1 um/s^2", 10.0, "acceleration"),
        ("114 dB re 20 µPa", 20e-6 * 10 ** (114 / 20), "pressure"),
        ("140 dB re 1 uN", 10.0, "force"),
        ("120 dB re 1 nm/s", 1e-3, "velocity"),
        ("10 m/s²", 10.0, "acceleration"),
        ("10 m/s² RMS", 10.0, "acceleration"),
        ("1 g", STANDARD_GRAVITY_M_PER_S2, "acceleration"),  # exact (CGPM 1901)
        ("1 Pa", 1.0, "pressure"),
        ("10 N", 10.0, "force"),
        ("10 mm/s", 1e-2, "velocity"),
        ("10 µm", 1e-5, "displacement"),
    ],
)
def test_levels_and_amounts_name_their_quantity(text, value, quantity):
    rms, named = parse_level_of(text)
    assert rms == pytest.approx(value, rel=1e-12)
    assert named is not None and named.name == quantity


@given(level=st.floats(min_value=-50, max_value=250), reference=st.floats(1e-12, 1.0))
def test_a_bare_level_is_re_the_callers_reference(level, reference):
    # Property: L dB re r is r·10^(L/20) (IEC 60027-3, field quantity), in both spellings.
    for text in (f"{level!r}", f"{level!r} dB", level):
        rms, named = parse_level_of(text, reference=reference)
        assert named is None
        assert rms == pytest.approx(reference * 10 ** (level / 20), rel=1e-12)


@pytest.mark.parametrize("text", ["94 dB", "94"])
def test_a_bare_level_needs_a_reference(text):
    with pytest.raises(UnitError, match="names no reference"):
        parse_level_of(text, what="--level")


@pytest.mark.parametrize("text", ["10 V", "10 furlong", "-1 g", "0 N", "94 dB re 1 V", "loud"])
def test_refused_levels_name_the_option(text):
    with pytest.raises(UnitError, match=r"^--level: "):
        parse_level_of(text, reference=1e-6, what="--level")


@given(
    value=st.floats(min_value=1e-6, max_value=1e6, allow_nan=False),
    name=st.sampled_from(["pressure", "acceleration", "velocity", "displacement", "force"]),
)
def test_compact_sensitivity_reads_back_within_its_digits(value, name):
    # Property: 5 significant digits read back within half a unit of the last: 5e-5.
    s = Sensitivity(value * 1e-3, "V", QUANTITIES[name])
    back = parse_sensitivity_of(compact_sensitivity(s))
    assert back.quantity == s.quantity
    assert math.isclose(back.value, s.value, rel_tol=5e-5)

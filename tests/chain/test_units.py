"""Parsing and formatting of quantities (piezo.chain.units)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from piezo.chain.units import (
    ACCEPTED_UNITS,
    db_to_ratio,
    format_quantity,
    format_uncertain,
    parse_charge_gain,
    parse_duration,
    parse_frequency,
    parse_frequency_list,
    parse_frequency_range,
    parse_gain,
    parse_quantity,
    parse_sensitivity,
    ratio_to_db,
)
from piezo.errors import UnitError


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("47n", "F", 47e-9),
        ("47 nF", "F", 47e-9),
        ("100 pF", "F", 100e-12),
        ("1G", "Ohm", 1e9),
        ("1 GOhm", "Ohm", 1e9),
        ("1 GΩ", "Ohm", 1e9),
        ("4k7", "Ohm", 4700.0),
        ("2M2", "Ohm", 2.2e6),
        ("2.5 V", "V", 2.5),
        ("20 uPa", "Pa", 20e-6),
        ("20 µPa", "Pa", 20e-6),
        ("48k", "Hz", 48000.0),
        ("10 kHz", "Hz", 10000.0),
        ("1e3", "Hz", 1000.0),
        ("-3.5e-2 V", "V", -0.035),
        ("4 nV/sqrtHz", "V/sqrtHz", 4e-9),
        ("90 pF/m", "F/m", 90e-12),
    ],
)
def test_parse_quantity_known_values(text, unit, expected):
    # SI prefixes per the SI Brochure (BIPM, 9th ed., table 7); relative 1e-12 covers the
    # decimal-to-binary rounding of the product mantissa * 10^k.
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=1e-12)


def test_unknown_unit_lists_what_is_accepted():
    with pytest.raises(UnitError, match=r"--cap: unknown unit in '47 nH'; expected .*F"):
        parse_quantity("47 nH", "F", what="--cap")


def test_not_a_number():
    with pytest.raises(UnitError, match="does not start with a number"):
        parse_quantity("lots", "V")


@pytest.mark.parametrize(
    ("text", "expected_v_per_pa"),
    [
        ("20 mV/Pa", 0.02),
        ("0.02 V/Pa", 0.02),
        # -34 dBV/Pa = 10^(-34/20) V/Pa (IEC 60027-3 field-quantity level).
        ("-34 dBV/Pa", 10 ** (-34 / 20)),
        ("-34dB re 1V/Pa", 10 ** (-34 / 20)),
        # Hydrophone form: -196 dB re 1 V/µPa = -76 dB re 1 V/Pa (120 dB per 10^6).
        ("-196 dBV/uPa", 10 ** (-76 / 20)),
    ],
)
def test_parse_sensitivity(text, expected_v_per_pa):
    assert parse_sensitivity(text) == pytest.approx(expected_v_per_pa, rel=1e-12)


def test_charge_sensitivity_needs_charge_gain():
    # The library names its own argument, never a command-line option.
    with pytest.raises(UnitError, match=r"^sensitivity: .*charge_gain_v_per_c") as info:
        parse_sensitivity("12 pC/Pa")
    assert "--" not in str(info.value)
    with pytest.raises(UnitError, match=r"^--sens: .*\(--charge-gain, "):
        parse_sensitivity("12 pC/Pa", what="--sens", charge_gain_name="--charge-gain")
    # 12 pC/Pa through 1 mV/pC is 12 mV/Pa (charge amplifier textbook relation V = Q/Cf).
    gain = parse_charge_gain("1 mV/pC")
    assert gain == pytest.approx(1e9)
    assert parse_sensitivity("12 pC/Pa", charge_gain_v_per_c=gain) == pytest.approx(12e-3)


@pytest.mark.parametrize("text", ["0 mV/Pa", "-20 mV/Pa", "nan V/Pa"])
def test_sensitivity_must_be_positive(text):
    with pytest.raises(UnitError):
        parse_sensitivity(text)


@pytest.mark.parametrize(
    ("text", "ratio"),
    [
        ("20 dB", 10.0),
        ("0 dB", 1.0),
        ("-6.0206 dB", 0.5),
        ("10", 10.0),
        ("x2", 2.0),
        ("10 V/V", 10.0),
    ],
)
def test_parse_gain(text, ratio):
    assert parse_gain(text) == pytest.approx(ratio, rel=1e-5)


@pytest.mark.parametrize("text", ["0", "-3", "loud", "20 dBA"])
def test_bad_gain(text):
    with pytest.raises(UnitError):
        parse_gain(text)


@pytest.mark.parametrize(
    ("text", "seconds"),
    [("1s", 1.0), ("125 ms", 0.125), ("2 min", 120.0), ("1 h", 3600.0), ("0.5", 0.5)],
)
def test_parse_duration(text, seconds):
    assert parse_duration(text) == pytest.approx(seconds)


def test_parse_frequency_list():
    assert parse_frequency_list("10Hz, 100 Hz,1k") == pytest.approx([10, 100, 1000])


@pytest.mark.parametrize(
    ("text", "range_hz"),
    [
        ("0.5 Hz .. 10 kHz", (0.5, 10000.0)),
        ("1 Hz to 8 kHz", (1.0, 8000.0)),
        ("2 – 20k", (2.0, 20000.0)),
        ("20Hz:20kHz", (20.0, 20000.0)),
        ("DC .. 4 kHz", (0.0, 4000.0)),
        (["3 Hz", "12 kHz"], (3.0, 12000.0)),
        ([0, 5000], (0.0, 5000.0)),
    ],
)
def test_parse_frequency_range(text, range_hz):
    # Data-sheet forms of a usable frequency range; SI prefixes as in parse_quantity.
    assert parse_frequency_range(text) == range_hz


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("20Hz-20kHz", "must look like 'LOW .. HIGH'"),
        ("10 kHz", "must look like"),
        (["1 Hz", "2 Hz", "3 Hz"], "must look like"),
        (10000, "must look like"),
        ("10 kHz .. 1 Hz", "the low end must lie below the high end"),
        ("5 Hz .. 5 Hz", "the low end must lie below the high end"),
        ("-1 Hz .. 5 kHz", "the low end must be 0 Hz or above"),
        ("1 Hz .. 0 Hz", r"\(high end\) must be a positive frequency"),
        ("1 Hz .. 10 kV", r"\(high end\): unknown unit"),
    ],
)
def test_parse_frequency_range_refuses(text, message):
    with pytest.raises(UnitError, match=rf"^sensor\.frequency_range.*{message}"):
        parse_frequency_range(text, what="sensor.frequency_range")


frequencies = st.floats(min_value=1e-3, max_value=1e9, allow_nan=False, allow_infinity=False)
#: Every separator the range grammar takes (the forms of tone --bandwidth, levels
#: --velocity-band, impedance/ringdown --band, frontend --noise-band, profiles).
separators = st.sampled_from([" .. ", "..", ":", " : ", " to ", " – ", "–"])


@given(low=frequencies, high=frequencies, sep=separators, positive=st.booleans())
def test_frequency_range_round_trip(low, high, sep, positive):
    """Property: two formatted frequencies joined by any separator read back as the pair
    (to the six formatted digits), in order; the reversed pair is refused."""
    if not low < high * (1 - 1e-4):  # ends that six digits keep apart
        low, high = min(low, high) / 2, max(low, high)
    text = f"{format_quantity(low, 'Hz', digits=6)}{sep}{format_quantity(high, 'Hz', digits=6)}"
    got = parse_frequency_range(text, what="--band", positive=positive)
    # Six significant digits: each end within half a unit of the 6th digit.
    assert math.isclose(got[0], low, rel_tol=5e-6) and math.isclose(got[1], high, rel_tol=5e-6)
    backwards = (
        f"{format_quantity(high, 'Hz', digits=6)}{sep}{format_quantity(low, 'Hz', digits=6)}"
    )
    with pytest.raises(UnitError, match=r"^--band: the low end must lie below the high end"):
        parse_frequency_range(backwards, what="--band", positive=positive)


@given(st.text(max_size=16), st.booleans())
def test_frequency_range_parses_or_refuses(text, positive):
    """Property: any text gives an ordered pair of finite frequencies, or a UnitError that
    names the option; nothing else."""
    try:
        low, high = parse_frequency_range(text, what="--velocity-band", positive=positive)
    except UnitError as exc:
        assert exc.message.startswith("--velocity-band")
        return
    assert 0 <= low < high and math.isfinite(high)
    assert low > 0 or not positive


@pytest.mark.parametrize("text", ["0 Hz:1 kHz", "DC .. 4 kHz", [0, 5000]])
def test_frequency_range_positive_refuses_a_zero_low_end(text):
    # A band-pass or fit band needs a low end above 0 Hz; the same text without
    # positive=True is a valid data-sheet range (test_parse_frequency_range).
    assert parse_frequency_range(text)[0] == 0.0
    with pytest.raises(UnitError, match=r"^--band: the low end must lie above 0 Hz"):
        parse_frequency_range(text, what="--band", positive=True)


def test_db_round_trip():
    # 20 lg 10 = 20 dB by definition of the field-quantity level.
    assert ratio_to_db(10.0) == pytest.approx(20.0)
    assert db_to_ratio(ratio_to_db(0.3)) == pytest.approx(0.3)


units = st.sampled_from(sorted(ACCEPTED_UNITS))
magnitudes = st.floats(min_value=1e-14, max_value=1e13, allow_nan=False, allow_infinity=False)


@given(value=magnitudes, sign=st.sampled_from([1.0, -1.0]), unit=units)
def test_format_then_parse_is_identity(value, sign, unit):
    """Property: parse(format(x)) equals x rounded to the formatted digits."""
    x = sign * value
    text = format_quantity(x, unit, digits=6)
    back = parse_quantity(text, unit)
    # Six significant digits: the round trip can differ by half a unit in the 6th digit.
    assert math.isclose(back, x, rel_tol=5e-6), (x, text, back)


@given(st.text(max_size=12))
def test_parser_never_crashes_unexpectedly(text):
    """Property: any text either parses or raises UnitError, nothing else."""
    try:
        value = parse_quantity(text, "F")
    except UnitError:
        return
    assert math.isfinite(value)


@pytest.mark.parametrize(
    ("parse", "text"),
    [
        (lambda t: parse_gain(t), "3 furlongs"),
        (lambda t: parse_charge_gain(t), "1 mV"),
        (lambda t: parse_sensitivity(t), "12 mV"),
    ],
)
def test_default_names_are_arguments_not_options(parse, text):
    with pytest.raises(UnitError) as info:
        parse(text)
    assert "--" not in str(info.value)


@pytest.mark.parametrize(
    ("value", "u", "unit", "k", "expected"),
    [
        # Issue 12 §3.11: the two prints the issue quotes, with coverage stated and value
        # and uncertainty rounded together (GUM, JCGM 100:2008, 7.2.6: two significant
        # digits of the uncertainty, the value to the same decimal place).
        (234.1, 0.0033, "Hz", 2, "234.1000 Hz ± 0.0066 Hz (k = 2)"),
        (7.997988, 0.0029024, "", 2, "7.9980 ± 0.0058 (k = 2)"),
        # GUM 7.2.2: a standard uncertainty is not written with "±".
        (100.02147, 0.00035, "g", 1, "100.02147 g (u = 0.00035 g)"),
        # Uncertainty rounding to the tens: the value too (GUM 7.2.6).
        (7904.3, 155.5, "Hz", 2, "7900 Hz ± 310 Hz (k = 2)"),
        # Rounding carries into a third digit: 99.7 → "100", the value follows.
        (1234.5678, 49.85, "Hz", 2, "1230 Hz ± 100 Hz (k = 2)"),
        (-45.58269, 0.000114806, "dB", 2, "-45.58269 dB ± 0.00023 dB (k = 2)"),
    ],
)
def test_format_uncertain_rounds_value_and_uncertainty_together(value, u, unit, k, expected):
    assert format_uncertain(value, u, unit, coverage_factor=k) == expected


def test_format_uncertain_undetermined_and_negligible():
    assert format_uncertain(6200.0, math.nan, "Hz") == "6200 Hz (uncertainty not determined)"
    assert format_uncertain(6200.0, None, "Hz") == "6200 Hz (uncertainty not determined)"
    assert format_uncertain(6200.0, 2.7e-13, "Hz") == "6200.00000 Hz (uncertainty below 1 ppb)"
    with pytest.raises(UnitError, match="coverage_factor"):
        format_uncertain(1.0, 0.1, coverage_factor=0.5)


@given(
    st.floats(-1e6, 1e6, allow_nan=False),
    st.floats(1e-6, 1e5, allow_nan=False),
)
def test_format_uncertain_keeps_two_digits_and_the_same_decimal_place(value, u):
    # Property (GUM 7.2.6): the printed U has two significant digits (or is a round
    # power of ten after carrying), and the value has exactly as many decimals as U.
    text = format_uncertain(value, u, "V")
    if "ppb" in text:
        return
    v_text, rest = text.split(" V ± ")
    u_text = rest.split(" V")[0]
    assert len(v_text.partition(".")[2]) == len(u_text.partition(".")[2])
    digits = u_text.replace(".", "").lstrip("0")
    assert 1 <= len(digits.rstrip("0") or "1") <= 2
    assert float(u_text) == pytest.approx(2 * u, rel=0.06)
    assert abs(float(v_text) - value) <= float(u_text) / 10 + 1e-9 * abs(value) + 1e-12


@given(st.floats(min_value=1e-6, max_value=1e9, allow_nan=False, allow_infinity=False))
def test_parse_frequency_reads_back_any_positive_value(value):
    assert parse_frequency(f"{value!r} Hz") == pytest.approx(value, rel=1e-12)
    assert parse_frequency(f"{value / 1e3!r} kHz") == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize("text", ["0 Hz", "-1 Hz", "inf Hz", "nan Hz", "1 s", ""])
def test_parse_frequency_refuses_what_is_not_a_positive_frequency(text):
    with pytest.raises(UnitError, match="--resolution"):
        parse_frequency(text, "--resolution")

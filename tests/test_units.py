"""model.design.units: reading and writing SI-prefixed values and the letter code.

Sources: SI prefixes (names, symbols, powers of ten) from the BIPM SI
Brochure, 9th edition, table 7; the resistance and capacitance letter code
from IEC 60062 (its examples are quoted from memory of the standard's style:
4K7 / 4k7, R47, 2M2, 1R0, 4n7). Where a check is a project choice rather than
a standard it says "project rule".
"""

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from model.design.units import format_rkm, format_si, parse_value
from model.errors import StageledgerError, UnitError

REL = 1e-12  # parsing goes through decimal text, so only float rounding remains


# --- parse_value: good input -------------------------------------------------

@pytest.mark.parametrize(
    "text, expected",
    [
        ("0.7", 0.7),
        ("-5", -5.0),
        ("+5", 5.0),
        ("1e-3", 1e-3),
        ("2.2e3", 2200.0),
        ("2.2E3", 2200.0),
        ("  47  ", 47.0),
        (".5", 0.5),
        ("\u22125", -5.0),  # U+2212 MINUS SIGN, as pasted from typeset text
    ],
)
def test_plain_decimals(text, expected):
    assert parse_value(text) == pytest.approx(expected, rel=REL)


@pytest.mark.parametrize(
    "text, expected",
    [
        # BIPM SI Brochure table 7: symbol and power of ten of each prefix.
        ("1T", 1e12),
        ("1G", 1e9),
        ("2M", 2e6),
        ("2.2k", 2.2e3),
        ("3.3m", 3.3e-3),
        ("10u", 10e-6),  # project rule: ASCII u for micro, common practice
        ("10\u00b5", 10e-6),  # U+00B5 MICRO SIGN
        ("10\u03bc", 10e-6),  # U+03BC GREEK SMALL LETTER MU, the SI Brochure's symbol
        ("100n", 100e-9),
        ("5p", 5e-12),
        ("1f", 1e-15),
        ("4.7 k", 4.7e3),  # project rule: a space may separate number and prefix
        ("-4.7m", -4.7e-3),
    ],
)
def test_si_prefixes(text, expected):
    assert parse_value(text) == pytest.approx(expected, rel=REL)


def test_milli_and_mega_are_never_confused():
    # BIPM SI Brochure table 7: m is 10^-3 and M is 10^6; prefix symbols are case sensitive.
    assert parse_value("1m") == pytest.approx(1e-3, rel=REL)
    assert parse_value("1M") == pytest.approx(1e6, rel=REL)


@pytest.mark.parametrize(
    "text, expected",
    [
        # IEC 60062 letter code: the letter stands in place of the decimal point.
        ("4k7", 4.7e3),
        ("4K7", 4.7e3),  # IEC 60062 writes K for kilo in resistor codes (from memory)
        ("R47", 0.47),
        ("R1", 0.1),
        ("2M2", 2.2e6),
        ("1R0", 1.0),
        ("10R", 10.0),
        ("4n7", 4.7e-9),
        ("2u2", 2.2e-6),
        ("6p8", 6.8e-12),
        ("1G5", 1.5e9),
        ("10k", 10e3),
        ("-4k7", -4.7e3),  # project rule: a sign works with every notation
    ],
)
def test_rkm_letter_code(text, expected):
    assert parse_value(text) == pytest.approx(expected, rel=REL)


@pytest.mark.parametrize(
    "text, unit, expected",
    [
        ("4.7kΩ", "Ω", 4.7e3),
        ("4k7 Ω", "Ω", 4.7e3),
        ("4k7ohm", "Ω", 4.7e3),
        ("4k7 Ohms", "Ω", 4.7e3),
        ("4k7\u2126", "Ω", 4.7e3),  # U+2126 OHM SIGN looks the same as Ω
        ("100nF", "F", 100e-9),
        ("1F", "F", 1.0),
        ("1fF", "F", 1e-15),  # femto (lower case) before farad (upper case)
        ("5 V", "V", 5.0),
        ("12.3 mA", "A", 12.3e-3),
        ("250mW", "W", 0.25),
        ("1 kHz", "Hz", 1e3),
        ("10 ms", "s", 10e-3),
        ("4.7k", "Ω", 4.7e3),  # the unit symbol is optional
    ],
)
def test_trailing_unit_symbol(text, unit, expected):
    # Unit symbols Ω, F, V, A, W, Hz, s from the BIPM SI Brochure, table 4.
    assert parse_value(text, unit) == pytest.approx(expected, rel=REL)


@pytest.mark.parametrize("text, sign", [("inf", 1), ("∞", 1), ("-inf", -1), ("∞ Ω", 1), ("Infinity", 1)])
def test_infinity_only_when_allowed(text, sign):
    result = parse_value(text, "Ω", allow_inf=True)
    assert math.isinf(result) and math.copysign(1, result) == sign
    with pytest.raises(UnitError, match="infinite value is not allowed"):
        parse_value(text, "Ω")


@pytest.mark.parametrize("number", [0, 3, -2, 4.7, 1e-12, -0.5])
def test_numbers_pass_through_as_float(number):
    result = parse_value(number)
    assert type(result) is float and result == pytest.approx(number, rel=REL)


def test_float_infinity_only_when_allowed():
    assert math.isinf(parse_value(math.inf, allow_inf=True))
    with pytest.raises(UnitError, match="infinite"):
        parse_value(math.inf)
    with pytest.raises(UnitError, match="infinite"):
        parse_value(-math.inf)


# --- parse_value: bad input --------------------------------------------------

@pytest.mark.parametrize(
    "text, unit, reason",
    [
        ("", "", "not a number with an SI prefix or RKM code"),
        ("   ", "", "not a number with an SI prefix or RKM code"),
        ("-", "", "not a number with an SI prefix or RKM code"),
        ("k", "", "not a number with an SI prefix or RKM code"),
        ("R", "", "not a number with an SI prefix or RKM code"),
        ("4k7k", "", "not a number with an SI prefix or RKM code"),
        ("4 k7", "", "not a number with an SI prefix or RKM code"),
        ("--5", "", "not a number with an SI prefix or RKM code"),
        ("1,5", "", "not a number with an SI prefix or RKM code"),
        ("Ω", "Ω", "not a number with an SI prefix or RKM code"),
        ("lots", "V", "not a number with an SI prefix or RKM code"),  # ends in s, yet no time
        ("1e", "", "exponent has no digits"),
        ("1e-", "", "exponent has no digits"),
        ("1e3k", "", "both an exponent and a prefix"),
        ("5x", "", "unknown prefix 'x'"),
        ("4x7", "", "unknown prefix 'x'"),
        ("1P", "", "unknown prefix 'P'"),  # project rule: the table stops at tera
        ("1.2.3", "", "two decimal points"),
        ("2meg", "", "'meg' is not accepted; write M for mega"),
        ("2Meg", "", "'meg' is not accepted; write M for mega"),
        ("2MEGohm", "Ω", "'meg' is not accepted; write M for mega"),
        ("100nF", "Ω", "unit 'F' does not match the expected 'Ω'"),
        ("4k7 Ω", "F", "unit 'Ω' does not match the expected 'F'"),
        ("10 ms", "V", "unit 's' does not match the expected 'V'"),
        ("100nF", "", "unexpected unit 'F'"),
        ("1F", "", "unexpected unit 'F'"),  # never read as femto, which is lower-case f
        ("nan", "", "nan is not a value"),
        ("1e999", "", "too large to represent"),
    ],
)
def test_bad_text_is_refused_with_a_reason(text, unit, reason):
    with pytest.raises(UnitError) as caught:
        parse_value(text, unit)
    assert reason in str(caught.value)
    assert repr(text) in str(caught.value)  # the message names the input
    assert caught.value.text == text


@pytest.mark.parametrize("value", [math.nan, True, False, None, [1.0], b"4k7"])
def test_bad_objects_are_refused(value):
    with pytest.raises(UnitError) as caught:
        parse_value(value, allow_inf=True)
    assert repr(value) in str(caught.value)


def test_unit_error_is_a_value_error_of_the_project():
    with pytest.raises(ValueError):
        parse_value("4k7k")
    with pytest.raises(StageledgerError):
        parse_value("4k7k")


# --- format_si ---------------------------------------------------------------

@pytest.mark.parametrize(
    "value, unit, expected",
    [
        # project rule: engineering notation, three significant figures.
        (4700, "Ω", "4.70 kΩ"),
        (0.0123, "A", "12.3 mA"),
        (1e-7, "F", "100 nF"),
        (2.2e-6, "F", "2.20 µF"),
        (0, "V", "0 V"),
        (-1.5, "V", "-1.50 V"),
        (-0.0, "V", "0 V"),
        (12.3, "", "12.3"),
        (999.96, "", "1.00 k"),  # rounding carries across the prefix boundary
        (999.4, "Ω", "999 Ω"),
        (0.99996e-3, "A", "1.00 mA"),
        (1e12, "Hz", "1.00 THz"),
        (1e15, "V", "1.00e15 V"),  # beyond tera: exponent notation
        (1e-18, "F", "1.00e-18 F"),
        (math.inf, "Ω", "∞ Ω"),
        (-math.inf, "Ω", "-∞ Ω"),
        (math.nan, "V", "nan"),
    ],
)
def test_format_si(value, unit, expected):
    assert format_si(value, unit) == expected


@pytest.mark.parametrize(
    "value, unit, expected",
    [(4700, "Ω", "4.70 kohm"), (2.2e-6, "F", "2.20 uF"), (math.inf, "Ω", "inf ohm")],
)
def test_format_si_ascii(value, unit, expected):
    assert format_si(value, unit, ascii=True) == expected


@pytest.mark.parametrize("digits, expected", [(1, "5 k"), (2, "4.7 k"), (4, "4.700 k")])
def test_format_si_digits(digits, expected):
    assert format_si(4700, digits=digits) == expected


def test_format_si_one_digit_pads_whole_part():
    assert format_si(470, digits=1) == "500"


def test_format_si_rejects_zero_digits():
    with pytest.raises(ValueError, match="digits"):
        format_si(1.0, digits=0)


# --- format_rkm --------------------------------------------------------------

@pytest.mark.parametrize(
    "value, expected",
    [
        # IEC 60062 letter code examples (the standard's style, from memory).
        (4700, "4k7"),
        (0.47, "R47"),
        (2.2e6, "2M2"),
        (1.0, "1R0"),
        (10.0, "10R"),
        (100.0, "100R"),
        (1e3, "1k0"),
        (10e3, "10k"),
        (100e3, "100k"),
        (0.1, "R10"),
        (0.047, "R047"),
        (999.96, "1k0"),  # rounding carries across the letter boundary
        (4.75e3, "4k75"),
    ],
)
def test_format_rkm_resistance(value, expected):
    assert format_rkm(value) == expected


@pytest.mark.parametrize(
    "value, expected",
    [
        # IEC 60062 capacitance code uses p, n, µ (written u here, project rule), m.
        (4.7e-9, "4n7"),
        (100e-9, "100n"),
        (2.2e-6, "2u2"),
        (6.8e-12, "6p8"),
        (0.47, "470m"),
        (1.0, "1R0"),
    ],
)
def test_format_rkm_capacitance(value, expected):
    assert format_rkm(value, capacitance=True) == expected


@pytest.mark.parametrize("value", [0, -4700, math.inf, math.nan, True, "4k7"])
def test_format_rkm_refuses_non_positive(value):
    with pytest.raises(UnitError, match="positive, finite") as caught:
        format_rkm(value)
    assert repr(value) in str(caught.value)


@pytest.mark.parametrize("value, capacitance", [(1e15, False), (1e-16, True)])
def test_format_rkm_refuses_values_beyond_its_letters(value, capacitance):
    with pytest.raises(UnitError, match="outside the range of the letter code"):
        format_rkm(value, capacitance=capacitance)


# --- round trips -------------------------------------------------------------

magnitudes = st.floats(min_value=1e-20, max_value=1e20, allow_nan=False, allow_infinity=False)
signs = st.sampled_from([1.0, -1.0])
digit_counts = st.integers(min_value=1, max_value=6)
units = st.sampled_from(["", "Ω", "F", "V", "A", "W", "Hz", "s"])


def _rounding(digits):
    # Half a unit in the last kept figure, relative to the leading figure,
    # plus a little for binary rounding.
    return 0.5 * 10.0 ** (1 - digits) * (1 + 1e-9)


@given(magnitudes, signs, digit_counts, units, st.booleans())
def test_format_si_reads_back(magnitude, sign, digits, unit, ascii):
    value = sign * magnitude
    text = format_si(value, unit, digits, ascii=ascii)
    assert parse_value(text, unit) == pytest.approx(value, rel=_rounding(digits))


@given(st.floats(min_value=1e-3, max_value=9e14), digit_counts)
def test_format_rkm_resistance_reads_back(value, digits):
    text = format_rkm(value, digits)
    assert parse_value(text, "Ω") == pytest.approx(value, rel=_rounding(digits))


@given(st.floats(min_value=1e-15, max_value=9e14), digit_counts)
def test_format_rkm_capacitance_reads_back(value, digits):
    text = format_rkm(value, digits, capacitance=True)
    assert parse_value(text, "F") == pytest.approx(value, rel=_rounding(digits))


@given(st.floats(allow_nan=False, allow_infinity=False).filter(lambda v: v != 0))
def test_repr_of_any_float_reads_back(value):
    # Python's shortest repr ("1e-05", "4700.0") is plain decimal/exponent text.
    assert parse_value(repr(value)) == pytest.approx(value, rel=REL)

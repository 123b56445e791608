"""Tests for audiobw.units: reading and writing quantities."""

from __future__ import annotations

import math
import re

import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from audiobw.errors import ParameterError
from audiobw.units import (
    DBU_REF_VRMS,
    KINDS,
    MAX_GRID_COUNT,
    ZERO_CELSIUS_K,
    format_quantity,
    parse_band,
    parse_grid,
    parse_int_list,
    parse_name_list,
    parse_quantity,
)

REL = 1e-12


def refused(name: str, value: object, *fragments: str):
    """pytest.raises for a ParameterError naming *name* and *value* (repr)."""
    pattern = re.escape(f"{name}: {value!r} ")
    if fragments:
        pattern += ".*" + ".*".join(re.escape(f) for f in fragments)
    return pytest.raises(ParameterError, match=pattern)


# --------------------------------------------------------------------------
# constants


def test_dbu_reference():
    # 0 dBu = 0.775 V rms (common practice; sqrt(0.001 W * 600 ohm) = sqrt(0.6) V)
    assert DBU_REF_VRMS == pytest.approx(0.7745966692414834, rel=REL)
    assert DBU_REF_VRMS**2 / 600.0 == pytest.approx(1e-3, rel=REL)


def test_zero_celsius():
    # 0 °C = 273.15 K (SI brochure, 9th ed.)
    assert ZERO_CELSIUS_K == 273.15


# --------------------------------------------------------------------------
# parse_quantity: accepted values

GOOD = [
    # resistance, ohms; SI prefixes (SI brochure, 9th ed., table of SI prefixes)
    ("resistance", "150", 150.0),
    ("resistance", "2.2k", 2200.0),
    ("resistance", "150ohm", 150.0),
    ("resistance", "150 ohms", 150.0),
    ("resistance", "150Ω", 150.0),  # U+03A9 Greek capital omega
    ("resistance", "150\u2126", 150.0),  # U+2126 ohm sign
    ("resistance", "1kohm", 1000.0),
    ("resistance", "1kOhm", 1000.0),
    ("resistance", "1MΩ", 1e6),
    ("resistance", "  47 k ", 47e3),
    ("resistance", "0", 0.0),  # ideal source
    ("resistance", "100m", 0.1),  # m is milli
    ("resistance", 600, 600.0),
    ("resistance", 0, 0.0),
    # temperature, kelvin; T/K = t/°C + 273.15 (SI brochure, 9th ed.)
    ("temperature", "300", 300.0),
    ("temperature", "300K", 300.0),
    ("temperature", "290 K", 290.0),
    ("temperature", "27C", 300.15),
    ("temperature", "27°C", 300.15),
    ("temperature", "27 degC", 300.15),
    ("temperature", "27c", 300.15),
    ("temperature", "-10C", 263.15),
    ("temperature", "0C", 273.15),
    ("temperature", 290, 290.0),
    ("temperature", 296.15, 296.15),
    # gain, dB
    ("gain_db", "40", 40.0),
    ("gain_db", "40dB", 40.0),
    ("gain_db", "-6dB", -6.0),
    ("gain_db", "+6.5 db", 6.5),
    ("gain_db", 0, 0.0),
    ("gain_db", -20.5, -20.5),
    # voltage noise density, V/√Hz
    ("voltage_density", "1.2n", 1.2e-9),
    ("voltage_density", "1.2nV", 1.2e-9),
    ("voltage_density", "1.2nV/rtHz", 1.2e-9),
    ("voltage_density", "1.2nV/√Hz", 1.2e-9),
    ("voltage_density", "1.2nV/sqrt(Hz)", 1.2e-9),
    ("voltage_density", "1.2 nV / √Hz", 1.2e-9),
    ("voltage_density", "1.2e-9", 1.2e-9),
    ("voltage_density", "4µV/rtHz", 4e-6),  # U+00B5 micro sign
    ("voltage_density", "4μV/rtHz", 4e-6),  # U+03BC Greek mu
    ("voltage_density", "4uV/rtHz", 4e-6),
    ("voltage_density", "0", 0.0),
    ("voltage_density", 3e-9, 3e-9),
    # current noise density, A/√Hz
    ("current_density", "1.5p", 1.5e-12),
    ("current_density", "1.5pA", 1.5e-12),
    ("current_density", "1.5pA/rtHz", 1.5e-12),
    ("current_density", "1.5pA/√Hz", 1.5e-12),
    ("current_density", "400fA/sqrt(Hz)", 4e-13),
    ("current_density", "1.5e-12", 1.5e-12),
    ("current_density", 0.0, 0.0),
    # bit depth
    ("bits", "24", 24.0),
    ("bits", "24bit", 24.0),
    ("bits", "24bits", 24.0),
    ("bits", "16 bit", 16.0),
    ("bits", "1", 1.0),
    ("bits", "32", 32.0),
    ("bits", 16, 16.0),
    # voltage, V rms
    ("voltage", "2", 2.0),
    ("voltage", "2V", 2.0),
    ("voltage", "2Vrms", 2.0),
    ("voltage", "2 V rms", 2.0),
    ("voltage", "775m", 0.775),
    ("voltage", "775mV", 0.775),
    ("voltage", "0dBu", math.sqrt(0.6)),  # common practice
    ("voltage", "+4dBu", math.sqrt(0.6) * 10 ** (4 / 20)),  # ≈ 1.228 V
    ("voltage", "-10dBV", 10 ** (-10 / 20)),  # 0 dBV = 1 V (common practice)
    ("voltage", "0dBV", 1.0),
    ("voltage", 1.5, 1.5),
    # frequency, Hz
    ("frequency", "997", 997.0),
    ("frequency", "20k", 20e3),
    ("frequency", "20kHz", 20e3),
    ("frequency", "1.5MHz", 1.5e6),
    ("frequency", "20 Hz", 20.0),
    ("frequency", "20hz", 20.0),
    ("frequency", "1G", 1e9),
    ("frequency", 48000, 48000.0),
    # plain dB
    ("db", "0.1", 0.1),
    ("db", "0.1dB", 0.1),
    ("db", "60dB", 60.0),
    ("db", "-3 dB", -3.0),
    ("db", 1, 1.0),
    # THD+N, returned in percent; dB is 20·log10 of an amplitude ratio (common practice)
    ("thdn", "0.05%", 0.05),
    ("thdn", "1 %", 1.0),
    ("thdn", "100%", 100.0),
    ("thdn", "-66dB", 100 * 10 ** (-66 / 20)),  # ≈ 0.0501 %
    ("thdn", "-40dB", 1.0),
    ("thdn", "-100 dB", 1e-3),
    ("thdn", "0dB", 100.0),
    # level, dBFS
    ("level_dbfs", "-1", -1.0),
    ("level_dbfs", "-1dBFS", -1.0),
    ("level_dbfs", "0dBFS", 0.0),
    ("level_dbfs", "-20.5 dbfs", -20.5),
    ("level_dbfs", -3, -3.0),
    # fraction
    ("fraction", "95%", 0.95),
    ("fraction", "0.95", 0.95),
    ("fraction", "1", 1.0),
    ("fraction", "100%", 1.0),
    ("fraction", "0.5 %", 0.005),
    ("fraction", 0.9, 0.9),
    ("fraction", 1, 1.0),
    # seconds
    ("seconds", "12", 12.0),
    ("seconds", "12s", 12.0),
    ("seconds", "500ms", 0.5),
    ("seconds", "250 us", 250e-6),
    ("seconds", 2.5, 2.5),
]


@pytest.mark.parametrize(("kind", "text", "expected"), GOOD)
def test_parse_quantity_accepts(kind, text, expected):
    got = parse_quantity(text, kind, name="--x")
    assert isinstance(got, float)
    assert got == pytest.approx(expected, rel=REL, abs=0.0)


def test_every_kind_has_good_examples():
    assert {kind for kind, _, _ in GOOD} == set(KINDS)


def test_prefixed_values_are_the_nearest_float():
    # Decimal scaling: "1.2n" is exactly the float literal 1.2e-9, not 1.2 * 1e-9.
    assert parse_quantity("1.2n", "voltage_density", name="--en") == 1.2e-9
    assert parse_quantity("2.2k", "resistance", name="--rs") == 2200.0
    assert parse_quantity("95%", "fraction", name="--f") == 0.95


def test_numpy_scalars_are_numbers():
    np = pytest.importorskip("numpy")
    assert parse_quantity(np.float64(2.5), "seconds", name="--t") == 2.5
    assert parse_quantity(np.int64(600), "resistance", name="--rs") == 600.0


# --------------------------------------------------------------------------
# parse_quantity: refused values

BAD = [
    ("resistance", "2k2", "is not a resistance"),
    ("resistance", "2.2K", "lowercase k"),
    ("resistance", "-150", "is negative"),
    ("resistance", "-1kohm", "is negative"),
    ("resistance", -1, "is negative"),
    ("resistance", "150V", "is not a resistance"),
    ("resistance", "150 kk", "is not a resistance"),
    ("resistance", "", "is not a resistance"),
    ("resistance", "   ", "is not a resistance"),
    ("resistance", "ohm", "is not a resistance"),
    ("resistance", "1 2", "is not a resistance"),
    ("resistance", "1,5k", "is not a resistance"),
    ("resistance", "inf", "is not a resistance"),
    ("resistance", float("inf"), "is not a finite number"),
    ("resistance", float("nan"), "is not a finite number"),
    ("resistance", True, "is not a resistance"),
    ("resistance", None, "is not a resistance"),
    ("temperature", "0", "absolute zero"),
    ("temperature", "0K", "absolute zero"),
    ("temperature", "-273.15C", "absolute zero"),
    ("temperature", "-300C", "absolute zero"),
    ("temperature", 0, "absolute zero"),
    ("temperature", "300k", "is not a temperature"),  # kelvin is a capital K only
    ("temperature", "300mK", "is not a temperature"),  # no prefixes on temperature
    ("temperature", "80F", "is not a temperature"),
    ("gain_db", "40V", "is not a gain"),
    ("gain_db", "4x", "is not a gain"),
    ("gain_db", "40kdB", "is not a gain"),
    ("gain_db", "dB", "is not a gain"),
    ("voltage_density", "-1n", "is negative"),
    ("voltage_density", "1.2nA/rtHz", "is not a noise voltage density"),
    ("voltage_density", "1.2nV/Hz", "is not a noise voltage density"),
    ("current_density", "1.5pV", "is not a noise current density"),
    ("current_density", -1e-12, "is negative"),
    ("bits", "0", "is out of range"),
    ("bits", "33", "is out of range"),
    ("bits", "16.5", "is not a whole number"),
    ("bits", 16.5, "is not a whole number"),
    ("bits", "24kbit", "is not a bit depth"),
    ("bits", "24Hz", "is not a bit depth"),
    ("voltage", "0", "is not above 0"),
    ("voltage", "-2V", "is not above 0"),
    ("voltage", "2A", "is not a voltage"),
    ("voltage", "4dBm", "is not a voltage"),
    ("voltage", "4kdBu", "is not a voltage"),
    ("voltage", "+10000dBu", "is too large"),
    ("frequency", "0", "is not above 0"),
    ("frequency", "-20", "is not above 0"),
    ("frequency", "20kV", "is not a frequency"),
    ("frequency", "20 K", "lowercase k"),
    ("frequency", "1e400", "is not a finite number"),
    ("frequency", "fast", "is not a frequency"),
    ("db", "3V", "is not a dB value"),
    ("db", "3dBFS", "is not a dB value"),
    ("thdn", "27", "could be % or dB"),
    ("thdn", 0.05, "could be % or dB"),
    ("thdn", "66dB", "positive dB"),
    ("thdn", "0%", "is not above 0"),
    ("thdn", "-1%", "is not above 0"),
    ("thdn", "150%", "above 100%"),
    ("thdn", "0.05V", "is not a THD+N figure"),
    ("level_dbfs", "-1dBu", "is not a level"),
    ("level_dbfs", "-1V", "is not a level"),
    ("fraction", "0", "is out of range"),
    ("fraction", "1.5", "is out of range"),
    ("fraction", "150%", "is out of range"),
    ("fraction", "-5%", "is out of range"),
    ("fraction", 95, "is out of range"),
    ("fraction", "0.5x", "is not a fraction"),
    ("seconds", "0", "is not above 0"),
    ("seconds", "-1s", "is not above 0"),
    ("seconds", "12min", "is not a duration"),
    ("seconds", "12Hz", "is not a duration"),
]


@pytest.mark.parametrize(("kind", "value", "reason"), BAD)
def test_parse_quantity_refuses(kind, value, reason):
    with refused("--opt", value, reason, "accepted: ") as info:
        parse_quantity(value, kind, name="--opt")
    assert "\n" not in str(info.value)


def test_every_kind_has_bad_examples():
    assert {kind for kind, _, _ in BAD} == set(KINDS)


def test_gain_message_matches_project_wording():
    with pytest.raises(ParameterError) as info:
        parse_quantity("4x", "gain_db", name="--gain")
    assert str(info.value) == ("--gain: '4x' is not a gain; accepted: a number in dB such as 40 or 40dB")


def test_thdn_bare_number_message_says_give_percent_or_db():
    with refused("--thdn", "27", "give % or dB"):
        parse_quantity("27", "thdn", name="--thdn")


def test_key_name_from_toml_is_used():
    with refused("chain.stage1.rs", "-5", "is negative"):
        parse_quantity("-5", "resistance", name="chain.stage1.rs")


def test_refusal_is_a_value_error_too():
    with pytest.raises(ValueError):
        parse_quantity("x", "frequency", name="--f")


def test_unknown_kind_is_a_caller_error():
    with pytest.raises(ValueError, match="unknown quantity kind 'mass'") as info:
        parse_quantity("1", "mass", name="--m")
    assert not isinstance(info.value, ParameterError)


# --------------------------------------------------------------------------
# parse_band


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("20:20k", (20.0, 20000.0)),
        ("40:9.5k", (40.0, 9500.0)),
        (":9.5k", (None, 9500.0)),
        ("40:", (40.0, None)),
        (" 20 Hz : 20 kHz ", (20.0, 20000.0)),
        ("0.5:1.5M", (0.5, 1.5e6)),
        ([20, 20000], (20.0, 20000.0)),
        (["", "9.5k"], (None, 9500.0)),
    ],
)
def test_parse_band_accepts(text, expected):
    low, high = parse_band(text, name="--band")
    for got, want in zip((low, high), expected):
        if want is None:
            assert got is None
        else:
            assert got == pytest.approx(want, rel=REL)


def test_parse_band_low_above_high_message():
    with pytest.raises(ParameterError) as info:
        parse_band("20k:20", name="--band")
    message = str(info.value)
    assert message.startswith("--band: '20k:20' has the low edge above the high edge; accepted: ")
    assert "LOW:HIGH" in message and "LOW < HIGH" in message and "20:20k" in message


@pytest.mark.parametrize(
    ("text", "reason"),
    [
        ("20k:20", "above the high edge"),
        ("1k:1k", "equal to the high edge"),
        (":", "neither edge"),
        ("  :  ", "neither edge"),
        ("", "is not a band"),
        ("20k", "is not a band"),
        ("20:1k:20k", "is not a band"),
        ("0:20k", "low edge '0'"),
        ("-20:20k", "low edge '-20'"),
        ("20:0", "high edge '0'"),
        ("20:20kV", "high edge '20kV'"),
        ("x:y", "low edge 'x'"),
        ([1, 2, 3], "is not a band"),
        (20, "is not a band"),
    ],
)
def test_parse_band_refuses(text, reason):
    with refused("--band", text, reason):
        parse_band(text, name="--band")


# --------------------------------------------------------------------------
# parse_grid


def test_parse_grid_log_range():
    grid = parse_grid("2k:20k:40", name="--cutoffs")
    assert len(grid) == 40
    assert grid[0] == 2000.0 and grid[-1] == 20000.0
    ratio = 10 ** (1 / 39)  # one decade in 39 equal log steps
    for a, b in zip(grid, grid[1:]):
        assert b / a == pytest.approx(ratio, rel=1e-12)


def test_parse_grid_two_points_and_whitespace():
    assert parse_grid(" 100 Hz : 1 kHz : 2 ", name="--g") == [100.0, 1000.0]


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("100,200,400", [100.0, 200.0, 400.0]),
        ("400, 100 ,200,100", [100.0, 200.0, 400.0]),
        ("1k", [1000.0]),
        ("1k:1k:1", [1000.0]),
        ("1k:1k:5", [1000.0]),
        (1000, [1000.0]),
        ([400, "1k", 100.0], [100.0, 400.0, 1000.0]),
    ],
)
def test_parse_grid_lists_and_single_values(text, expected):
    got = parse_grid(text, name="--g")
    assert got == pytest.approx(expected, rel=REL)
    assert all(isinstance(v, float) for v in got)


@pytest.mark.parametrize(
    ("text", "reason"),
    [
        ("20k:2k:10", "START above STOP"),
        ("2k:20k:1", "COUNT 1 for a range"),
        ("2k:20k:0", "COUNT 0"),
        ("2k:20k:-3", "COUNT -3"),
        ("2k:20k:4.5", "COUNT '4.5'"),
        ("2k:20k:x", "COUNT 'x'"),
        (f"1:2:{MAX_GRID_COUNT + 1}", f"COUNT {MAX_GRID_COUNT + 1}"),
        ("2k:20k", "is not START:STOP:COUNT"),
        ("0:20k:10", "holds '0'"),
        ("100,,200", "holds ''"),
        ("100,-200", "holds '-200'"),
        ("100,2kV", "holds '2kV'"),
        ("", "is empty"),
        ([], "is empty"),
        (0, "holds 0"),
    ],
)
def test_parse_grid_refuses(text, reason):
    with refused("--g", text, reason):
        parse_grid(text, name="--g")


# --------------------------------------------------------------------------
# parse_int_list


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("2,4,6,8", [2, 4, 6, 8]),
        ("4", [4]),
        (" 8 , 2 ,8", [8, 2]),
        (4, [4]),
        ([2, 4], [2, 4]),
        (["2", 3], [2, 3]),
        ("1,8", [1, 8]),
    ],
)
def test_parse_int_list_accepts(text, expected):
    assert parse_int_list(text, name="--order", low=1, high=8) == expected


def test_parse_int_list_out_of_range_message():
    with pytest.raises(ParameterError) as info:
        parse_int_list("2,20", name="--order", low=1, high=8)
    assert str(info.value) == "--order: 20 is out of range; accepted: integers 1 to 8"


@pytest.mark.parametrize(
    ("text", "value", "reason"),
    [
        ("0", 0, "is out of range"),
        ("9", 9, "is out of range"),
        ([2, 9], 9, "is out of range"),
        ("2.5", "2.5", "is not an integer"),
        ("2,,4", "", "is not an integer"),
        ("two", "two", "is not an integer"),
        ([2, 4.0], 4.0, "is not an integer"),
        ([True], True, "is not an integer"),
        ("", "", "is empty"),
        ([], [], "is empty"),
        (True, True, "is not a list of integers"),
    ],
)
def test_parse_int_list_refuses(text, value, reason):
    with refused("--order", value, reason, "integers 1 to 8"):
        parse_int_list(text, name="--order", low=1, high=8)


# --------------------------------------------------------------------------
# parse_name_list

FAMILIES = ("butterworth", "bessel", "chebyshev1", "chebyshev2", "elliptic")
ALIASES = {"butter": "butterworth", "cheby1": "chebyshev1", "cheby2": "chebyshev2", "ellip": "elliptic"}


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("butterworth,bessel", ["butterworth", "bessel"]),
        ("Bessel, BUTTER", ["bessel", "butterworth"]),
        ("cheby1,ellip,chebyshev1", ["chebyshev1", "elliptic"]),
        (["butter", "butterworth", "bessel"], ["butterworth", "bessel"]),
        ("elliptic", ["elliptic"]),
    ],
)
def test_parse_name_list_accepts(text, expected):
    got = parse_name_list(text, name="--family", choices=FAMILIES, aliases=ALIASES)
    assert got == expected


def test_parse_name_list_without_aliases():
    assert parse_name_list("b,a", name="--k", choices=["a", "b"]) == ["b", "a"]
    with refused("--k", "butter", "a, b"):
        parse_name_list("butter", name="--k", choices=["a", "b"])


@pytest.mark.parametrize(
    ("text", "value", "reason"),
    [
        ("chebby", "chebby", "is not an accepted name"),
        ("butter,,bessel", "", "is not an accepted name"),
        (["bessel", 3], 3, "is not an accepted name"),
        ("", "", "is empty"),
        ([], [], "is empty"),
    ],
)
def test_parse_name_list_refuses(text, value, reason):
    with refused("--family", value, reason, "butterworth, bessel", "butter"):
        parse_name_list(text, name="--family", choices=FAMILIES, aliases=ALIASES)


def test_parse_name_list_bad_alias_is_a_caller_error():
    with pytest.raises(ValueError, match="alias 'x'") as info:
        parse_name_list("a", name="--k", choices=["a"], aliases={"x": "zzz"})
    assert not isinstance(info.value, ParameterError)


# --------------------------------------------------------------------------
# format_quantity


@pytest.mark.parametrize(
    ("args", "kwargs", "expected"),
    [
        ((2200, "Ω"), {}, "2.2 kΩ"),
        ((1.2e-9, "V/√Hz"), {}, "1.2 nV/√Hz"),
        ((0.0,), {}, "0"),
        ((0.0, "Ω"), {}, "0 Ω"),
        ((2200,), {"compact": True}, "2.2k"),
        ((20000, "Hz"), {"compact": True}, "20kHz"),
        ((4.7e-6, "s"), {}, "4.7 µs"),
        ((4.7e-6, "s"), {"compact": True}, "4.7us"),
        ((1.5e6, "Hz"), {}, "1.5 MHz"),
        ((997, "Hz"), {}, "997 Hz"),
        ((1e-15,), {}, "1 f"),
        ((123456.0, "Hz"), {}, "123.5 kHz"),
        ((123456.0, "Hz"), {"digits": 2}, "120 kHz"),
        ((999.96, "Hz"), {}, "1 kHz"),  # rounding carries into the next prefix
        ((0.9999996,), {"compact": True}, "1"),
        ((-2200, "Ω"), {}, "-2.2 kΩ"),
        ((-66.0, "dB"), {}, "-66 dB"),  # no prefix on logarithmic units
        ((1234.5678, "dB"), {}, "1235 dB"),
        ((0.05, "%"), {"compact": True}, "0.05%"),
        ((1.2e-18,), {}, "1.2e-18"),
        ((2e12, "Hz"), {"compact": True}, "2e+12Hz"),
        ((float("inf"),), {}, "inf"),
    ],
)
def test_format_quantity(args, kwargs, expected):
    assert format_quantity(*args, **kwargs) == expected


def test_format_quantity_bad_digits_is_a_caller_error():
    with pytest.raises(ValueError, match="digits"):
        format_quantity(1.0, digits=0)


# Log-uniform magnitudes 1e-15 ... 1e9: a mantissa in [1, 10) times a power of ten.
MAGNITUDES = st.builds(
    lambda mantissa, power: min(mantissa * 10.0**power, 1e9),
    st.floats(min_value=1.0, max_value=10.0, allow_nan=False, allow_infinity=False),
    st.integers(min_value=-15, max_value=8),
)
ROUND_TRIP = [("resistance", "Ω"), ("frequency", "Hz"), ("voltage_density", "V/√Hz")]


def _in_limits(value, kind):
    """Within the kind's physical range (outside it parse_quantity refuses, tested in test_fuzz.py)."""
    from audiobw.units import _KINDS

    lo, hi = _KINDS[kind].limits
    return lo <= value <= hi


@settings(max_examples=300, deadline=None)
@given(value=MAGNITUDES, pair=st.sampled_from(ROUND_TRIP), digits=st.integers(1, 12))
def test_compact_round_trip_log_uniform(value, pair, digits):
    kind, _ = pair
    assume(_in_limits(value, kind))
    text = format_quantity(value, digits=digits, compact=True)
    back = parse_quantity(text, kind, name="--x")
    assert back == pytest.approx(value, rel=10.0 ** -(digits - 1)), text


@settings(max_examples=300, deadline=None)
@given(
    value=st.floats(min_value=1e-15, max_value=1e9, allow_nan=False, allow_infinity=False),
    pair=st.sampled_from(ROUND_TRIP),
    digits=st.integers(1, 12),
    compact=st.booleans(),
)
def test_round_trip_with_units(value, pair, digits, compact):
    # With the unit symbol attached, compact or spaced, text reads back too.
    kind, unit = pair
    assume(_in_limits(value, kind))
    text = format_quantity(value, unit, digits, compact=compact)
    back = parse_quantity(text, kind, name="--x")
    assert back == pytest.approx(value, rel=10.0 ** -(digits - 1)), text


@settings(max_examples=200, deadline=None)
@given(value=MAGNITUDES, digits=st.integers(1, 12))
def test_compact_text_is_short_and_ascii(value, digits):
    text = format_quantity(value, digits=digits, compact=True)
    assert text.isascii() and " " not in text
    # at most `digits` significant digits and no exponent inside the SI range
    assert "e" not in text
    assert len(text.rstrip("fpnumkMG").replace(".", "").lstrip("0")) <= max(digits, 3)


def test_zero_round_trips_for_resistance():
    assert parse_quantity(format_quantity(0.0, compact=True), "resistance", name="--rs") == 0.0

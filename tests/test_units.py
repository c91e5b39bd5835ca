"""The one quantity parser: exact unit spellings, refused bare numbers, case slips, plausibility.

SI prefixes and unit symbols are those of the SI brochure (BIPM, 9th ed., 2019): k = 10³, M = 10⁶,
m = 10⁻³, n = 10⁻⁹, p = 10⁻¹²; the VSWR–return-loss relation RL = −20·log10((s − 1)/(s + 1)) is the
textbook definition (Pozar, Microwave Engineering, 4th ed., sec. 2.3, recalled from memory).
"""

from __future__ import annotations

import math

import pytest

from optmatch.units import (
    InputError,
    parse_capacitance,
    parse_complex,
    parse_db,
    parse_duration,
    parse_frequency,
    parse_impedance_real,
    parse_inductance,
    parse_length,
    parse_percent,
    parse_power,
    parse_vswr,
    vswr_to_return_loss_db,
)


@pytest.mark.parametrize(
    ("text", "parse", "si"),
    [
        ("146MHz", parse_frequency, 146e6),
        ("433.92 MHz", parse_frequency, 433.92e6),
        ("2.4GHz", parse_frequency, 2.4e9),
        ("10 kHz", parse_frequency, 1e4),
        ("1THz", parse_frequency, 1e12),
        ("15nH", parse_inductance, 15e-9),
        ("2.2 pF", parse_capacitance, 2.2e-12),
        ("100W", parse_power, 100.0),
        ("1.5kW", parse_power, 1500.0),
        ("90s", parse_duration, 90.0),
        ("5min", parse_duration, 300.0),
        ("2%", parse_percent, 0.02),
        ("75 ohm", parse_impedance_real, 75.0),
        ("75Ω", parse_impedance_real, 75.0),
        (50, parse_impedance_real, 50.0),  # a bare impedance is ohms (the trade's habit)
        (15, parse_db, 15.0),  # a bare return loss is dB (the trade's habit)
        ("15 dB", parse_db, 15.0),
    ],
)
def test_si_prefixes(text, parse, si):
    # SI brochure prefixes (BIPM, 9th ed.)
    assert parse(text) == pytest.approx(si, rel=1e-15)


def test_dbm_is_a_power():
    # identity: P = 1 mW · 10^(dBm/10); 50 dBm = 100 W, 30 dBm = 1 W
    assert parse_power("50dBm") == pytest.approx(100.0)
    assert parse_power("30 dBm") == pytest.approx(1.0)


@pytest.mark.parametrize(
    ("text", "parse", "hint"),
    [
        ("146", parse_frequency, "146 what? write 146MHz"),
        (146, parse_frequency, "146 what? write 146MHz"),
        ("433920000", parse_frequency, "433920000 what? write 433920000Hz"),
        ("90", parse_inductance, "90 what? write 90nH"),
        ("12.5", parse_capacitance, "12.5 what? write 12.5pF"),
        ("100", parse_power, "100 what? write 100W"),
        ("90", parse_duration, "90 what? write 90s"),
        ("2", parse_percent, "2 what? write 2%"),
        ("45", parse_length, "45 what? write e.g. 45deg or 45mm"),
    ],
)
def test_bare_numbers_refused_where_ambiguous(text, parse, hint):
    with pytest.raises(InputError) as info:
        parse(text, "x")
    assert str(info.value).startswith(f"x: {hint}")


@pytest.mark.parametrize(
    ("text", "parse", "hint"),
    [
        ("146mhz", parse_frequency, "did you mean 146 MHz?"),
        ("146 MHZ", parse_frequency, "did you mean 146 MHz?"),
        ("2 ghz", parse_frequency, "did you mean 2 GHz?"),
        ("10 khz", parse_frequency, "did you mean 10 kHz?"),
        ("10 KHz", parse_frequency, "did you mean 10 kHz?"),
        ("15 nh", parse_inductance, "did you mean 15 nH?"),
        ("2.2 pf", parse_capacitance, "did you mean 2.2 pF?"),
        ("15 db", parse_db, "did you mean 15 dB?"),
        ("45 Deg", parse_length, "did you mean 45 deg?"),
        ("2GHzz", parse_frequency, "did you mean 2 GHz?"),
    ],
)
def test_case_slips_refused_with_did_you_mean(text, parse, hint):
    with pytest.raises(InputError) as info:
        parse(text, "x")
    assert hint in str(info.value)


def test_millihertz_is_refused_in_a_frequency():
    # SI: m is milli, so mHz is millihertz; no RF study is in millihertz, so it is refused, not read.
    with pytest.raises(InputError) as info:
        parse_frequency("146mHz", "from")
    assert "millihertz" in str(info.value) and "did you mean 146 MHz?" in str(info.value)


def test_unit_of_another_quantity_names_both():
    with pytest.raises(InputError, match="'5pF' is a capacitance, not an inductance"):
        parse_inductance("5pF", "l")
    with pytest.raises(InputError, match="is an inductance, not a capacitance"):
        parse_capacitance("5nH", "c")


@pytest.mark.parametrize(
    ("text", "parse"),
    [
        ("999Hz", parse_frequency),  # below 1 kHz
        ("1.5THz", parse_frequency),  # above 1 THz
        ("0Hz", parse_frequency),
        ("-2GHz", parse_frequency),
        ("101", parse_db),  # return loss above 100 dB is refused by its kind below
        ("1.1km", parse_length),
        ("4us", parse_length),  # more than 1 km in free space
        ("20kohm", parse_impedance_real),  # a line or system impedance above 10 kΩ
        ("1e18", parse_complex),
        ("1e400", parse_complex),
        ("nan", parse_frequency),
    ],
)
def test_plausibility_ranges(text, parse):
    from optmatch.units import RETURN_LOSS

    with pytest.raises(InputError):
        if parse is parse_db:
            parse_db(text, "return_loss", RETURN_LOSS)
        else:
            parse(text, "x")


def test_vswr_and_return_loss():
    # RL = −20·log10((s−1)/(s+1)): VSWR 1.5 is 13.98 dB, VSWR 2 is 9.54 dB (Pozar, sec. 2.3, recalled)
    assert vswr_to_return_loss_db(1.5) == pytest.approx(-20 * math.log10(0.5 / 2.5))
    assert vswr_to_return_loss_db(1.5) == pytest.approx(13.979, abs=1e-3)
    assert vswr_to_return_loss_db(2.0) == pytest.approx(9.542, abs=1e-3)
    assert parse_vswr("1.5:1") == 1.5
    for bad in ("1", "0.9", "-2", "abc"):
        with pytest.raises(InputError):
            parse_vswr(bad, "vswr")


def test_every_message_is_one_line_and_starts_with_its_label():
    for text in ("146\x00MHz", "1e18", "x" * 500, "146mhz", "146 MHz\n2"):
        with pytest.raises(InputError) as info:
            parse_frequency(text, "--freq")
        msg = str(info.value)
        assert msg.startswith("--freq: ") and "\n" not in msg and len(msg) < 200

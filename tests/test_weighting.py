"""A-weighting against IEC 61672-1 and librosa; critical-band table."""

import numpy as np
import pytest

from audiobw.weighting import a_weighting_db, a_weighting_power, critical_band_edges

# IEC 61672-1:2013, Table 3: A-weighting at the nominal frequencies, in dB,
# rounded to 0.1 dB.  The standard computes them at the exact base-10
# frequencies fm = 1000 * 10^(n/10) Hz (IEC 61672-1:2013 §5.4.11, and
# IEC 61260-1 for the base-10 mid-band frequencies).  Values from memory of
# the table, n = -20 ... +13.
# fmt: off
IEC_TABLE3_A_DB = {
    -20: -70.4, -19: -63.4, -18: -56.7, -17: -50.5, -16: -44.7, -15: -39.4, -14: -34.6,
    -13: -30.2, -12: -26.2, -11: -22.5, -10: -19.1, -9: -16.1, -8: -13.4, -7: -10.9,
    -6: -8.6, -5: -6.6, -4: -4.8, -3: -3.2, -2: -1.9, -1: -0.8, 0: 0.0, 1: 0.6, 2: 1.0,
    3: 1.2, 4: 1.3, 5: 1.2, 6: 1.0, 7: 0.5, 8: -0.1, 9: -1.1, 10: -2.5, 11: -4.3,
    12: -6.6, 13: -9.3,
}
# fmt: on


@pytest.mark.parametrize("n,expected", sorted(IEC_TABLE3_A_DB.items()))
def test_a_weighting_matches_iec_61672_table3(n, expected):
    f = 1000.0 * 10 ** (n / 10)  # exact base-10 frequency
    # the table is rounded to 0.1 dB: agreement within half a step, plus the
    # ~0.001 dB that the rounded pole constants of eq. E.3 leave (at 158.5 Hz
    # the exact value, -13.350 dB, sits on a rounding boundary)
    assert a_weighting_db(f) == pytest.approx(expected, abs=0.05 + 0.002)


def test_a_weighting_is_zero_at_1khz():
    # IEC 61672-1:2013 eq. E.6: A1000 normalises A(1 kHz) to 0 dB (to within the
    # rounding of the published constants, ~0.001 dB)
    assert a_weighting_db(1000.0) == pytest.approx(0.0, abs=0.002)


def test_a_weighting_against_librosa():
    librosa = pytest.importorskip("librosa")
    f = np.geomspace(10, 20000, 200)
    ours = a_weighting_db(f)
    # librosa.A_weighting (librosa.core.convert) uses the same pole frequencies,
    # rounded slightly differently; min_db=None disables its floor.
    theirs = librosa.A_weighting(f, min_db=None)
    np.testing.assert_allclose(ours, theirs, atol=0.01)


def test_power_is_square_of_amplitude_in_db():
    f = np.array([50.0, 500.0, 5000.0])
    np.testing.assert_allclose(10 * np.log10(a_weighting_power(f)), a_weighting_db(f), rtol=1e-12)


def test_a_weighting_at_dc_is_zero_power():
    assert a_weighting_power(0.0) == 0.0


def test_critical_bands_follow_zwicker_and_end_at_top():
    e = critical_band_edges(24000.0)
    # Zwicker (1961) Table I: 24 bands up to 15.5 kHz
    assert list(e[:25]) == [
        0,
        100,
        200,
        300,
        400,
        510,
        630,
        770,
        920,
        1080,
        1270,
        1480,
        1720,
        2000,
        2320,
        2700,
        3150,
        3700,
        4400,
        5300,
        6400,
        7700,
        9500,
        12000,
        15500,
    ]
    assert e[-1] == 24000.0
    assert np.all(np.diff(e) > 0)
    low = critical_band_edges(4000.0)
    assert low[-1] == 4000.0 and np.all(np.diff(low) > 0)

"""A measured amplifier noise density table (--en-table FILE.csv, audiobw/entable.py)."""

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate

from audiobw.chain import Chain
from audiobw.cli import main
from audiobw.entable import MAX_ROWS, density_v2_hz, excess_per_hz
from audiobw.errors import AudioFileError, ParameterError
from audiobw.filters import Filter, FilterSpec, design
from audiobw.noise import FLICKER_FROM_HZ, budget, noise_spectra, noise_total
from audiobw.spectrum import trapezoid_weights

from .conftest import tones

FS = 48000.0
EN = 3e-9


def flat_digital() -> Filter:
    """Gain 1 everywhere: the meter band alone is then a brick-wall band (as in test_flicker.py)."""
    spec = FilterSpec("lowpass", "butterworth", 1, None, 20000.0, stage="digital", fs_hz=FS)
    return Filter(spec, np.array([], complex), np.array([], complex), 1.0)


def corner_table(corner_hz: float, rows: int = 400, top_hz: float = 1e6):
    """e_n(f) = EN·√(1 + fc/f) sampled at ``rows`` log-spaced frequencies from the 0.1 Hz floor."""
    f = np.geomspace(FLICKER_FROM_HZ, top_hz, rows)
    return tuple((float(x), float(EN * math.sqrt(1.0 + corner_hz / x))) for x in f)


def grid(n=8192):
    f = np.linspace(0.0, FS / 2, n + 1)
    return f, trapezoid_weights(f.size, f[1] - f[0])


def write_csv(path, rows, header="frequency_Hz,e_n_V_per_rtHz"):
    lines = ([header] if header else []) + [f"{f!r},{e!r}" for f, e in rows]
    path.write_text("\n".join(lines) + "\n")
    return path


# -- the model ----------------------------------------------------------------------------


@pytest.mark.parametrize(
    "stage,anti_alias,amp_bw",
    [("analog", "none", None), ("analog", "ideal", 30e3), ("digital", "none", 40e3), ("digital", "ideal", None)],
)
def test_a_flat_table_is_plain_en_exactly(stage, anti_alias, amp_bw):
    flat = Chain(
        en_table=((10.0, EN), (1e3, EN), (1e5, EN)),
        anti_alias=anti_alias,
        amp_bandwidth_hz=amp_bw,
        stage=stage,
        in_corner_hz=200.0,
    )
    plain = Chain(en_v_rthz=EN, anti_alias=anti_alias, amp_bandwidth_hz=amp_bw, stage=stage, in_corner_hz=200.0)
    assert flat.en_v_rthz == EN
    filt = design(FilterSpec("bandpass", "bessel", 3, 40.0, 12000.0, stage=stage, fs_hz=FS))
    f, w = grid()
    np.testing.assert_array_equal(noise_total(flat, filt, f, w, FS), noise_total(plain, filt, f, w, FS))
    a, b = noise_spectra(flat, filt, f, w, FS), noise_spectra(plain, filt, f, w, FS)
    for name in a.parts:
        np.testing.assert_array_equal(a.parts[name], b.parts[name])
    assert budget(flat, filt, FS, n_bins=4096) == budget(plain, filt, FS, n_bins=4096)


def test_density_is_log_log_between_rows_and_flat_beyond():
    table = ((10.0, 8e-9), (1000.0, 2e-9))
    d = density_v2_hz(table, np.array([1.0, 10.0, 100.0, 1000.0, 5e4]))
    # halfway in log frequency, halfway in log density: √(8·2) nV = 4 nV (a power law, common practice)
    np.testing.assert_allclose(np.sqrt(d), [8e-9, 8e-9, 4e-9, 2e-9, 2e-9], rtol=1e-12)


def _quad_band(table, f1, f2):
    """∫ e_n(f)² df over f1…f2 with scipy.integrate.quad, row segment by row segment, of this
    test's own log-log interpolation (numpy.interp on the logarithms), flat beyond the rows."""
    t = np.asarray(table)
    lf, le = np.log(t[:, 0]), 2 * np.log(t[:, 1])

    def p(x):
        return math.exp(float(np.interp(math.log(max(x, t[0, 0])), lf, le)))

    cuts = [f1] + [x for x in t[:, 0] if f1 < x < f2] + [f2]
    return sum(integrate.quad(p, a, b, epsabs=0.0, epsrel=1e-11)[0] for a, b in zip(cuts[:-1], cuts[1:]))


@pytest.mark.parametrize("corner", [20.0, 300.0, 3000.0])
@pytest.mark.parametrize("band", [(20.5, 20000.5), (0.5, 3400.5), (300.5, 3400.5)])
def test_a_dense_corner_table_is_the_corner_model(corner, band):
    """A table of e_n²·(1 + fc/f) sampled densely equals --en-corner within 1e-3 (the corner model,
    tests/test_flicker.py, as the independent reference), and its budget over a brick-wall band equals
    scipy.integrate.quad of the interpolated density (reference: scipy.integrate.quad) within 1e-9."""
    table = corner_table(corner)
    as_table = Chain(source_ohms=0.0, in_a_rthz=0.0, gain_db=0.0, en_table=table, anti_alias="ideal")
    as_corner = Chain(
        source_ohms=0.0, in_a_rthz=0.0, gain_db=0.0, en_v_rthz=EN, en_corner_hz=corner, anti_alias="ideal"
    )
    got = budget(as_table, flat_digital(), FS, meter=band, n_bins=24000)["components"]["amplifier_voltage"]["vrms"] ** 2
    ref = (
        budget(as_corner, flat_digital(), FS, meter=band, n_bins=24000)["components"]["amplifier_voltage"]["vrms"] ** 2
    )
    assert got == pytest.approx(ref, rel=1e-3, abs=0)
    assert got == pytest.approx(_quad_band(table, *band), rel=1e-9, abs=0)


@pytest.mark.parametrize("anti_alias", ["none", "ideal"])
def test_a_dense_corner_table_through_a_filter_and_folding(anti_alias):
    """Through an analog lowpass, folded or not, total noise and every sweep figure of the table
    chain stay within 1e-3 of the corner chain's."""
    filt = design(FilterSpec("lowpass", "butterworth", 2, None, 15000.0))
    f, w = grid(16384)
    kw = dict(gain_db=40.0, source_ohms=50.0, anti_alias=anti_alias)
    n_table = noise_total(Chain(en_table=corner_table(500.0), **kw), filt, f, w, FS)
    n_corner = noise_total(Chain(en_v_rthz=EN, en_corner_hz=500.0, **kw), filt, f, w, FS)
    assert float(np.sum(n_table * w)) == pytest.approx(float(np.sum(n_corner * w)), rel=1e-3, abs=0)


def test_bins_sum_to_the_exact_integral_from_the_floor():
    """Two rows, a 1/f² power law between them: ∫ (e²(f) − e_top²) df in closed form."""
    table = ((1.0, 100e-9), (100.0, 1e-9))  # e_n² falls 1e-4 over a factor 100: b = −2, e_n² = e1²/f²
    f = np.linspace(0.0, 1000.0, 1001)
    w = trapezoid_weights(f.size, 1.0)
    got = float(np.sum(excess_per_hz(table, f, w, FLICKER_FROM_HZ) * w))
    e1, e2 = (100e-9) ** 2, (1e-9) ** 2
    below = (e1 - e2) * (1.0 - FLICKER_FROM_HZ)  # flat at the first row below 1 Hz
    between = e1 * (1.0 - 1.0 / 100.0) - e2 * 99.0  # ∫₁¹⁰⁰ e1/f² df − e2·99
    assert got == pytest.approx(below + between, rel=1e-12, abs=0)


@settings(max_examples=40, deadline=None)
@given(
    freqs=st.lists(st.floats(0.2, 60e3), min_size=2, max_size=7, unique=True),
    values=st.lists(st.floats(0.5, 100.0), min_size=7, max_size=7),
    row=st.integers(0, 6),
    factor=st.floats(1.0, 20.0),
    case=st.sampled_from(
        [
            ("lowpass", "analog", "none"),
            ("lowpass", "analog", "ideal"),
            ("highpass", "analog", "ideal"),
            ("bandpass", "digital", "ideal"),
            ("bandpass", "analog", "none"),
        ]
    ),
)
def test_raising_any_row_never_lowers_the_noise(freqs, values, row, factor, case):
    freqs = sorted(freqs)
    if min(np.diff(freqs)) <= 1e-9 * max(freqs):
        return
    table = [(f, v * 1e-9) for f, v in zip(freqs, values)]
    raised = list(table)
    i = row % len(table)
    raised[i] = (raised[i][0], raised[i][1] * factor)
    response, stage, anti_alias = case
    edges = {"lowpass": (None, 8000.0), "highpass": (300.0, None), "bandpass": (30.0, 9000.0)}[response]
    filt = design(FilterSpec(response, "butterworth", 3, *edges, stage=stage, fs_hz=FS))
    f, w = grid(2048)
    kw = dict(anti_alias=anti_alias, stage=stage, amp_bandwidth_hz=60e3 if stage == "digital" else None)
    n0 = float(np.sum(noise_total(Chain(en_table=tuple(table), **kw), filt, f, w, FS) * w))
    n1 = float(np.sum(noise_total(Chain(en_table=tuple(raised), **kw), filt, f, w, FS) * w))
    assert n1 >= n0 * (1 - 1e-12)


def test_the_excess_reaches_the_wiener_bound(write_audio, rng, tmp_path, capsys):
    """The Wiener bound (perceptual scoring) sees the table's low-frequency excess: lower SER limit."""
    fs = 48000
    prog = write_audio("p.wav", tones([100.0, 1000.0], [0.05, 0.05], fs, 1.0) + rng.normal(0, 1e-6, fs), fs)
    csv_path = write_csv(tmp_path / "en.csv", [(1.0, 2e-6), (100.0, 2e-7), (1000.0, 5e-9), (1e5, 5e-9)])
    docs = []
    for extra, name in ((["--en", "5n"], "white"), (["--en-table", str(csv_path)], "table")):
        out = tmp_path / name
        assert (
            main(
                [
                    "sweep",
                    str(prog),
                    "--cutoffs",
                    "5k:20k:3",
                    "--max-loss",
                    "1",
                    "--gain",
                    "60",
                    "--out",
                    str(out),
                    *extra,
                ]
            )
            == 0
        )
        docs.append(json.loads((out / "sweep.json").read_text()))
    white, table = docs
    assert table["limits"]["wiener_ser_db"] < white["limits"]["wiener_ser_db"] - 1.0
    for a, b in zip(white["cases"], table["cases"]):
        assert b["noise_vrms"] > a["noise_vrms"]


# -- the command line -----------------------------------------------------------------------

BAD_TABLES = {
    "non_numeric": ("frequency,e_n\n10,3e-9\n100,fast\n", "row 3", "'fast' is not a number"),
    "one_row": ("frequency,e_n\n10,3e-9\n", "1 row", "2 to 10000 rows"),
    "not_increasing": ("10,3e-9\n100,3e-9\n100,2e-9\n", "row 3", "not above"),
    "decreasing": ("100,3e-9\n10,3e-9\n", "row 2", "not above"),
    "zero_frequency": ("0,3e-9\n10,3e-9\n", "row 1", "frequency"),
    "negative_en": ("10,3e-9\n100,-3e-9\n", "row 2", "e_n"),
    "zero_en": ("10,3e-9\n100,0\n", "row 2", "e_n"),
    "nan_en": ("10,3e-9\n100,nan\n", "row 2", "e_n"),
    "inf_frequency": ("10,3e-9\ninf,3e-9\n", "row 2", "frequency"),
    "en_too_large": ("10,3e-9\n100,1.2\n", "row 2", "at most 0.001 V/√Hz"),
    "three_cells": ("10,3e-9,4\n100,3e-9\n", "row 1", "cells"),
    "too_many_rows": ("".join(f"{i + 1},3e-9\n" for i in range(MAX_ROWS + 1)), "rows", "10000"),
}


def _one_line_refusal(capsys, args, *needles):
    code = main(args)
    err = capsys.readouterr().err
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert code == 2, err
    assert len(lines) == 1 and "Traceback" not in err, err
    for n in needles:
        assert n in lines[0], lines[0]
    return lines[0]


@pytest.mark.parametrize("kind", sorted(BAD_TABLES))
def test_a_bad_table_is_refused_in_one_line(tmp_path, capsys, kind):
    text, where, what = BAD_TABLES[kind]
    path = tmp_path / f"{kind}.csv"
    path.write_text(text)
    _one_line_refusal(
        capsys,
        ["noise", "--band", ":20k", "--en-table", str(path)],
        "--en-table",
        f"{kind}.csv",
        where,
        what,
        "accepted:",
    )


def test_a_missing_table_is_refused_in_one_line(tmp_path, capsys):
    _one_line_refusal(
        capsys,
        ["noise", "--band", ":20k", "--en-table", str(tmp_path / "nope.csv")],
        "--en-table",
        "nope.csv",
        "no such file",
    )


@pytest.mark.parametrize("other", [["--en", "3n"], ["--en-corner", "100"]])
def test_a_table_with_en_or_its_corner_conflicts(tmp_path, capsys, other):
    path = write_csv(tmp_path / "en.csv", [(10.0, 4e-9), (1e4, 3e-9)])
    _one_line_refusal(
        capsys, ["noise", "--band", ":20k", "--en-table", str(path), *other], "--en-table", "conflicts with " + other[0]
    )


def test_the_toml_path_is_relative_to_the_toml_file(tmp_path, capsys):
    sub = tmp_path / "bench"
    sub.mkdir()
    write_csv(sub / "amp.csv", [(1.0, 20e-9), (100.0, 4e-9), (1e4, 3e-9)])
    (sub / "chain.toml").write_text('[amplifier]\nen_table = "amp.csv"\ngain = 40\n')
    assert main(["noise", "--band", ":20k", "--chain", str(sub / "chain.toml"), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["chain"]["en_table"] == [[1.0, 20e-9], [100.0, 4e-9], [1e4, 3e-9]]
    assert out["chain"]["en_table_file"] == "amp.csv" and out["chain"]["en_v_rthz"] == 3e-9
    (sub / "clash.toml").write_text('[amplifier]\nen_table = "amp.csv"\nen = "2n"\n')
    _one_line_refusal(
        capsys,
        ["noise", "--band", ":20k", "--chain", str(sub / "clash.toml")],
        "[amplifier] en_table",
        "conflicts with",
    )


def test_the_noise_header_names_the_table(tmp_path, capsys):
    path = write_csv(tmp_path / "opamp.csv", [(1.0, 20e-9), (100.0, 4e-9), (1e4, 3e-9)])
    assert main(["noise", "--band", ":20k", "--en-table", str(path)]) == 0
    header = capsys.readouterr().out.splitlines()[0]
    assert "opamp.csv, 3 rows" in header and "white level 3 nV/√Hz" in header


def test_a_sweep_records_the_table_and_the_report_reads_it(write_audio, rng, tmp_path, capsys):
    from audiobw.report.validate import validate_sweep

    fs = 48000
    prog = write_audio("p.wav", tones([220.0, 1500.0], [0.1, 0.05], fs, 1.0) + rng.normal(0, 1e-5, fs), fs)
    rows = [(1.0, 30e-9), (10.0, 9e-9), (100.0, 4e-9), (1e3, 3.1e-9), (1e5, 3e-9)]
    path = write_csv(tmp_path / "measured.csv", rows)
    out = tmp_path / "o"
    assert (
        main(
            ["sweep", str(prog), "--cutoffs", "2k:20k:4", "--max-loss", "1", "--en-table", str(path), "--out", str(out)]
        )
        == 0
    )
    doc = json.loads((out / "sweep.json").read_text())
    assert doc["chain"]["en_table"] == [list(r) for r in rows]
    assert doc["chain"]["en_table_file"] == "measured.csv" and doc["chain"]["en_v_rthz"] == 3e-9
    capsys.readouterr()
    assert main(["report", str(out)]) == 0
    assert "measured e_n table" in (out / "spec.md").read_text()
    # a hand-edited white level that is not the table's top row is refused
    doc["chain"]["en_v_rthz"] = 5e-9
    with pytest.raises(AudioFileError, match="/chain/en_v_rthz"):
        validate_sweep(doc, "sweep.json")
    doc["chain"]["en_v_rthz"] = 3e-9
    doc["chain"]["en_table"][2][0] = 0.5
    with pytest.raises(AudioFileError, match="/chain/en_table"):
        validate_sweep(doc, "sweep.json")


def test_the_library_chain_takes_rows_and_refuses_a_corner():
    c = Chain(en_table=[[10, 4e-9], [1e4, 2e-9]])
    assert c.en_table == ((10.0, 4e-9), (1e4, 2e-9)) and c.en_v_rthz == 2e-9 and c.has_flicker
    assert Chain(**json.loads(json.dumps(c.to_json()))) == c
    with pytest.raises(ParameterError, match=r"^Chain\.en_table: conflicts with Chain\.en_corner_hz"):
        Chain(en_table=[[10, 4e-9], [1e4, 2e-9]], en_corner_hz=100.0)

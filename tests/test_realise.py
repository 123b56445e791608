"""audiobw.realise: sections, IEC 60063 series, stage design, stage noise, yield, command."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import signal

from audiobw.errors import ParameterError
from audiobw.filters import FilterSpec, design
from audiobw.realise import eseries
from audiobw.realise.build import kt_over_c_vrms, realise
from audiobw.realise.noise import stage_noise_density, transfer
from audiobw.realise.sections import pair_sections, prototype_response
from audiobw.realise.topologies import Stage, design_stage

ROOT = Path(__file__).resolve().parents[1]


def _qs(family, order):
    f = design(FilterSpec("lowpass", family, order, None, 1000.0))
    z, p, _ = f.zpk()
    return [s.q for s in pair_sections(z, p, "lowpass", family)]


# Section Q: published filter tables (Williams & Taylor, Electronic Filter Design Handbook,
# Butterworth and Bessel pole tables; values as quoted in op-amp vendor application notes
# on active low-pass filter design) and scipy.signal.buttap / besselap(norm='mag').
@pytest.mark.parametrize("family, expected", [("butterworth", (0.5412, 1.3066)), ("bessel", (0.5219, 0.8055))])
def test_section_q_of_order_4_matches_the_tables(family, expected):
    assert _qs(family, 4) == pytest.approx(expected, abs=6e-5)
    _, p, _ = signal.buttap(4) if family == "butterworth" else signal.besselap(4, norm="mag")
    q_scipy = sorted({round(abs(r) / (-2 * r.real), 6) for r in p})
    assert q_scipy == pytest.approx(expected, abs=6e-5)


def test_sections_lowest_q_first_and_odd_order_has_a_first_order_section():
    f = design(FilterSpec("lowpass", "butterworth", 5, None, 2000.0))
    z, p, k = f.zpk()
    secs = pair_sections(z, p, "lowpass", "butterworth")
    assert [s.kind for s in secs] == ["lp1", "lp2", "lp2"]
    assert [s.q for s in secs[1:]] == sorted(s.q for s in secs[1:])
    fr = np.geomspace(100, 20000, 40)
    prod = np.prod([s.response(fr) for s in secs], axis=0)
    np.testing.assert_allclose(prod, prototype_response(z, p, k, fr), rtol=1e-9)


def test_bandpass_cascade_equals_the_prototype():
    f = design(FilterSpec("bandpass", "bessel", 4, 40.0, 12000.0))
    z, p, k = f.zpk()
    secs = pair_sections(z, p, "bandpass", "bessel")
    assert sorted(s.kind for s in secs) == ["hp2", "hp2", "lp2", "lp2"]
    fr = np.geomspace(5, 1e5, 60)
    ratio = np.abs(np.prod([s.response(fr) for s in secs], axis=0) / prototype_response(z, p, k, fr))
    np.testing.assert_allclose(ratio, ratio[0], rtol=1e-6)  # the same shape; a flat gain apart
    assert abs(20 * np.log10(ratio[0])) < 0.1


def test_wide_odd_bandpass_uses_first_order_sections():
    f = design(FilterSpec("bandpass", "butterworth", 3, 20.0, 15000.0))
    z, p, k = f.zpk()
    secs = pair_sections(z, p, "bandpass", "butterworth")
    assert sorted(s.kind for s in secs) == ["hp1", "hp2", "lp1", "lp2"]
    fr = np.geomspace(2, 2e5, 60)
    ratio = np.abs(np.prod([s.response(fr) for s in secs], axis=0) / prototype_response(z, p, k, fr))
    np.testing.assert_allclose(ratio, ratio[0], rtol=1e-6)


def test_elliptic_notches_are_refused_in_one_line():
    f = design(FilterSpec("lowpass", "elliptic", 4, None, 1000.0, 0.5, 60.0))
    z, p, _ = f.zpk()
    with pytest.raises(ParameterError, match="notches"):
        pair_sections(z, p, "lowpass", "elliptic")


# IEC 60063:2015 Table 1: the eight E24 values that differ from round(10**(i/24), 1).
E24_EXCEPTIONS = {2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2}


def test_e_series_against_iec_60063():
    e24 = eseries.SERIES["E24"]
    formula = [round(10 ** (i / 24), 1) for i in range(24)]
    assert len(e24) == 24
    assert {v for v, r in zip(e24, formula) if abs(v - r) > 1e-9} == E24_EXCEPTIONS
    assert eseries.SERIES["E12"] == e24[::2]  # IEC 60063: E12 is every second E24 value
    assert eseries.SERIES["E6"] == e24[::4]
    e96 = eseries.SERIES["E96"]
    assert len(e96) == 96
    assert list(e96) == [round(10 ** (i / 96), 2) for i in range(96)]  # E96 follows the formula throughout
    assert eseries.nearest(4.6e3, "E24") == 4.7e3
    assert eseries.nearest(9.7e-9, "E12") == 1.0e-8
    assert eseries.at_least(2.21e-9, "E12") == 2.7e-9


def test_sallen_key_worked_example():
    # Op-amp vendor application note on active filter design ("Active Filter Design Techniques"),
    # unity-gain Sallen-Key 2nd-order Butterworth lowpass, fc = 3 kHz, C = 22 nF (to ground) and
    # 47 nF (feedback): R1 = 1.26 kΩ, R2 = 2.18 kΩ (from memory).
    stage = Stage("sallen-key", "lp2", {"R1": 1.26e3, "R2": 2.18e3, "C1": 47e-9, "C2": 22e-9}, None)
    f0, q = stage.f0_q()
    assert f0 == pytest.approx(3000.0, rel=0.01)
    assert q == pytest.approx(1 / math.sqrt(2), rel=0.01)


@pytest.mark.parametrize("topology", ["sallen-key", "mfb"])
@pytest.mark.parametrize("q", [0.5412, 1.3066, 3.0])
@pytest.mark.parametrize("kind", ["lp2", "hp2"])
def test_designed_stages_hit_f0_and_q_on_e96(topology, q, kind):
    from audiobw.realise.sections import Section

    st_ = design_stage(Section(kind, 1234.0, q), topology, r_level=10e3, r_series="E96", c_series="E12")
    f0, qb = st_.f0_q()
    assert f0 == pytest.approx(1234.0, rel=0.02)  # E96 resistors: 1 % steps
    assert qb == pytest.approx(q, rel=0.03)
    assert abs(st_.gain()) == pytest.approx(1.0, rel=1e-9)


# Independent nodal analysis for the test: unknowns are every node voltage but the input;
# KCL at every node except the op-amp output, plus the ideal op-amp's V+ = V−.
CIRCUITS = {
    ("sallen-key", "lp2"): ([("R1", "i", "a"), ("R2", "a", "b"), ("C1", "a", "o"), ("C2", "b", "0")], "b", "o"),
    ("sallen-key", "hp2"): ([("C1", "i", "a"), ("C2", "a", "b"), ("R1", "a", "o"), ("R2", "b", "0")], "b", "o"),
    ("mfb", "lp2"): (
        [("R1", "i", "a"), ("R2", "a", "o"), ("R3", "a", "m"), ("C1", "a", "0"), ("C2", "m", "o")],
        "0",
        "m",
    ),
    ("mfb", "hp2"): (
        [("C1", "i", "a"), ("C2", "a", "o"), ("C3", "a", "m"), ("R1", "a", "0"), ("R2", "m", "o")],
        "0",
        "m",
    ),
    ("mfb", "bp2"): (
        [("R1", "i", "a"), ("R2", "a", "0"), ("C1", "a", "m"), ("C2", "a", "o"), ("R3", "m", "o")],
        "0",
        "m",
    ),
    ("rc", "lp1"): ([("R1", "i", "a"), ("C1", "a", "0")], "a", "o"),
}


def _nodal(circuit, parts, f_hz):
    elems, plus, minus = circuit
    nodes = sorted({n for _, a, b in elems for n in (a, b)} - {"i", "0"} | {"o"})
    out = []
    for f in f_hz:
        s = 2j * math.pi * f
        n = len(nodes)
        a = np.zeros((n, n), complex)
        rhs = np.zeros(n, complex)
        rows = [x for x in nodes if x != "o"]
        for r, node in enumerate(rows):
            for name, p, q in elems:
                if node not in (p, q):
                    continue
                y = 1 / parts[name] if name[0] == "R" else s * parts[name]
                other = q if p == node else p
                a[r, nodes.index(node)] += y
                if other == "i":
                    rhs[r] += y  # V_in = 1
                elif other != "0":
                    a[r, nodes.index(other)] -= y
        r = n - 1
        if plus != "0":
            a[r, nodes.index(plus)] += 1
        if minus != "0":
            a[r, nodes.index(minus)] -= 1
        if plus == minus:  # follower: V+ = V_out
            pass
        if (plus, minus) == ("b", "o") or (plus, minus) == ("a", "o"):
            a[r, :] = 0
            a[r, nodes.index(plus)] = 1
            a[r, nodes.index("o")] = -1
        out.append(np.linalg.solve(a, rhs)[nodes.index("o")])
    return np.array(out)


@pytest.mark.parametrize("key", sorted(CIRCUITS))
def test_stage_response_matches_an_independent_nodal_analysis(key):
    from audiobw.realise.sections import Section

    kind = key[1]
    sec = Section(kind, 2000.0, None if kind.endswith("1") else 1.2)
    stage = design_stage(sec, key[0], r_level=4.7e3, r_series="E24", c_series="E12")
    assert (stage.topology, stage.kind) == key
    fr = np.geomspace(20, 2e5, 31)
    ref = _nodal(CIRCUITS[key], stage.parts, fr)
    np.testing.assert_allclose(stage.response(fr), ref, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(transfer(stage, fr), ref, rtol=1e-9, atol=1e-12)


def test_kt_over_c_of_one_rc_section():
    # Thermal noise of any R across C integrates to kT/C (Johnson–Nyquist; e.g. Horowitz & Hill,
    # The Art of Electronics, 3rd ed., §8.1): 10 nF at 290 K gives 0.633 µV rms.
    assert kt_over_c_vrms(10e-9, 290.0) == pytest.approx(0.633e-6, abs=0.0005e-6)
    stage = Stage("rc", "lp1", {"R1": 4.7e3, "C1": 10e-9}, None)
    f0 = 1 / (2 * math.pi * 4.7e3 * 10e-9)
    f = np.linspace(0, 2000 * f0, 400001)
    d = stage_noise_density(stage, f, en_v_hz=0.0, in_a_hz=0.0, temperature_k=290.0)["R1"]
    v = math.sqrt(np.trapezoid(d, f) if hasattr(np, "trapezoid") else np.trapz(d, f))
    assert v == pytest.approx(0.633e-6, rel=0.002)  # the tail above 2000·f0 holds 0.03 %


def test_opamp_noise_of_a_follower_is_en_at_unity_gain():
    stage = Stage("rc", "lp1", {"R1": 1e-3, "C1": 1e-12}, None)
    d = stage_noise_density(stage, np.array([1000.0]), en_v_hz=4e-9, in_a_hz=0.0)
    assert math.sqrt(d["op-amp e_n"][0]) == pytest.approx(4e-9, rel=1e-9)


SPEC = FilterSpec("bandpass", "butterworth", 4, 30.0, 12000.0)


def test_monte_carlo_is_reproducible_with_a_seed():
    a = realise(SPEC, draws=200, seed=7)
    b = realise(SPEC, draws=200, seed=7)
    assert a["yield"] == b["yield"]
    assert 0.0 <= a["yield"]["fraction"] <= 1.0
    assert a["yield"]["high_edge_hz"]["p5"] < 12000 < a["yield"]["high_edge_hz"]["p95"]


@settings(max_examples=6, deadline=None, derandomize=True)
@given(st.floats(0.001, 0.05), st.floats(1.2, 4.0))
def test_looser_tolerances_never_raise_the_yield(tol, factor):
    tight = realise(SPEC, tol_r=tol, tol_c=tol, draws=150, seed=3)["yield"]["fraction"]
    loose = realise(SPEC, tol_r=tol * factor, tol_c=tol * factor, draws=150, seed=3)["yield"]["fraction"]
    assert loose <= tight


def test_noise_is_the_sum_of_its_contributors():
    doc = realise(SPEC, draws=20)
    total = math.sqrt(sum(c["noise_vrms"] ** 2 for c in doc["noise"]["contributors"]))
    assert total == pytest.approx(doc["noise"]["noise_vrms"], rel=1e-9)


def _run(args):
    from click.testing import CliRunner

    from audiobw.cli import cli

    return CliRunner().invoke(cli, args)


def test_command_writes_schema_valid_json(tmp_path):
    jsonschema = pytest.importorskip("jsonschema")
    res = _run(["realise", "--band", "20:15k", "--order", "3", "--draws", "50", "--out", str(tmp_path)])
    assert res.exit_code == 0, res.output
    assert "verified on the bench" in res.output
    assert "Stage 1:" in res.output and "Yield:" in res.output
    doc = json.loads((tmp_path / "realise.json").read_text())
    schema = json.loads((ROOT / "docs" / "realise.schema.json").read_text())
    jsonschema.validate(doc, schema)  # jsonschema.validate, Draft 2020-12 from "$schema"
    assert (tmp_path / "realise-band.png").stat().st_size > 1000
    bad = dict(doc, stages=[])
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, schema)


@pytest.mark.parametrize(
    "args, needle",
    [
        (["--band", "20:15k", "--family", "elliptic", "--out", "X"], "notches"),
        (["--band", "20:15k"], "--out"),
        (["--band", "20:15k", "--impedance", "5", "--out", "X"], "--impedance"),
        (["--band", "20:15k", "--tolerance-r", "150%", "--out", "X"], "--tolerance-r"),
    ],
)
def test_command_refusals_are_one_line_exit_2(tmp_path, args, needle):
    args = [str(tmp_path) if a == "X" else a for a in args]
    from audiobw.cli import main

    import contextlib
    import io

    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        code = main(["realise", *args])
    assert code == 2
    assert needle in err.getvalue()
    assert "Traceback" not in err.getvalue()


def test_realise_a_sweep_folder_second_pass(write_audio, rng, tmp_path):
    from audiobw.cli import main

    from .conftest import tones

    fs = 48000
    x = tones([220.0, 1500.0, 6000.0], [0.2, 0.1, 0.03], fs, 2.0) + rng.normal(0, 1e-3, fs * 2)
    prog = write_audio("take.wav", x, fs)
    out = tmp_path / "sw"
    assert (
        main(
            [
                "sweep",
                str(prog),
                "--out",
                str(out),
                "--family",
                "butterworth",
                "--order",
                "4",
                "--cutoffs",
                "8k:20k:4",
                "--max-loss",
                "0.5",
                "--min-snr-a",
                "40",
            ]
        )
        == 0
    )
    before = (out / "sweep.json").read_bytes()
    res = _run(["realise", str(out), "--draws", "60"])
    assert res.exit_code == 0, res.output
    assert (out / "sweep.json").read_bytes() == before  # the sweep is not changed
    doc = json.loads((out / "realise.json").read_text())
    sweep = json.loads(before)
    case = sweep["cases"][sweep["choice"]["case"] - 1]
    sp = doc["second_pass"]
    # the chain's noise recomputed from the same model matches the sweep's own figure
    assert sp["chain_noise_recomputed_vrms"] == pytest.approx(case["noise_vrms"], rel=1e-3)
    # adding the filter's noise can only lower the SNR, by exactly the added power
    assert sp["snr_a_db_with_filter"] <= sp["snr_a_db"]
    assert sp["snr_db"] - sp["snr_db_with_filter"] == pytest.approx(sp["added_noise_db"], abs=1e-6)
    assert "Second pass:" in res.output and "verified on the bench" in res.output
    # the report picks up realise.json: the stage table and the yield in spec.md and report.html
    from audiobw.report.write import write_report

    paths = write_report(out, plots=True, html=True)
    md = paths["spec_md"].read_text()
    assert "### Realised stages" in md and "Stage 1:" in md and "Yield:" in md and "verified on the bench" in md
    page = paths["html"].read_text()
    assert 'id="realise"' in page and "realise-band.png" in page
    (out / "realise.json").write_text("{broken")
    md = write_report(out, plots=False, html=False)["spec_md"].read_text()
    assert "could not be read" in md

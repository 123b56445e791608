"""The option metadata is the one source of the model: defaults, limits, --help, and the JSON round trip.

Every option's limits refuse a value naming where it came from: the option
(``--gain``), the TOML file and its ``[section] key``, or, in library use,
the Python field (``Chain.gain_db``).
"""

import json
import re

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from audiobw.chain import CHAIN_FIELDS, Chain
from audiobw.cli import main
from audiobw.corpus.plain import options_hash
from audiobw.errors import ParameterError
from audiobw.metrics import Meter
from audiobw.model import Settings
from audiobw.options import CHAIN_KEYS, GRID_KEYS, METER_KEYS, OPTIONS, PROGRAM_KEYS, Limit, model_fields
from audiobw.settings import Raw, build, load_toml, merge
from audiobw.sweep import Grid

from .conftest import tones


def run(args, capsys):
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


# -- defaults -----------------------------------------------------------------------------


@pytest.mark.parametrize("model,cls", [("Chain", Chain), ("Grid", Grid), ("Meter", Meter)])
def test_the_model_classes_take_their_defaults_from_the_options(model, cls):
    fields = model_fields(model)
    assert fields, model
    made = cls()
    for name, option in fields.items():
        if option.default is not None:
            assert getattr(made, name) == option.default, f"{model}.{name}"


def test_every_option_fills_a_known_field_or_none():
    known = {
        "Chain": set(Chain.field_names()),
        "Grid": set(Grid.__dataclass_fields__),
        "Meter": set(Meter.__dataclass_fields__),
    }
    for key, o in OPTIONS.items():
        if o.field is None:
            continue
        model, name = o.field.split(".", 1)
        if model in known:
            assert name in known[model], f"{key}: {o.field}"
    assert set(o.key for o in CHAIN_FIELDS.values()) <= set(CHAIN_KEYS)


def test_the_toml_layout_in_the_docs_is_the_table():
    import audiobw.settings

    doc = audiobw.settings.__doc__
    layout = re.findall(r"^    \[(\w+)\]\s+(.+(?:\n {18}.+)*)", doc, flags=re.M)
    listed = {section: [k.strip() for k in keys.replace("\n", " ").split(",")] for section, keys in layout}
    table: dict = {}
    for key, o in OPTIONS.items():
        table.setdefault(o.section, []).append(key)
    assert listed == table


def test_help_shows_every_default_with_its_unit(capsys):
    code, out, _ = run(["sweep", "--help"], capsys)
    text = " ".join(out.split())  # click wraps lines
    assert code == 0
    for key in CHAIN_KEYS + GRID_KEYS + METER_KEYS + PROGRAM_KEYS:
        shown = OPTIONS[key].shown_default
        if shown is not None:
            assert f"[default: {' '.join(shown.split())}]" in text, key
    for expected in ("[default: 200 Ω]", "[default: 1.5 nV/√Hz]", "[default: 1 pA/√Hz]", "[default: 1.228 V rms]"):
        assert expected in text
    assert "[default: 997 Hz]" in text and "[default: -1 dBFS]" in text and "[default: 1%]" in text


# -- limits and the origin of a value --------------------------------------------------------


def outside(limit: Limit) -> float:
    """A number just outside ``limit``."""
    if limit.low is not None:
        return limit.low if limit.low_open else limit.low - 1.0
    assert limit.high is not None
    return limit.high if limit.high_open else limit.high + 1.0


LIMITED = [k for k, o in OPTIONS.items() if o.limit is not None]


@pytest.mark.parametrize("key", LIMITED)
def test_every_limit_names_the_option_or_the_file_key(key, tmp_path):
    """A value outside an option's limits is refused naming --option, or the file and [section] key."""
    o = OPTIONS[key]
    value = outside(o.limit)
    with pytest.raises(ParameterError) as cli:
        build({key: Raw(repr(value), o.flag)})
    assert str(cli.value).startswith(f"{o.flag}: ")
    cfg = tmp_path / "c.toml"
    cfg.write_text(f"[{o.section}]\n{key} = {value!r}\n", encoding="utf-8")
    with pytest.raises(ParameterError) as toml:
        build(load_toml(cfg))
    assert str(toml.value).startswith(f"{cfg} [{o.section}] {key}: ")
    assert o.flag not in str(toml.value).split(":")[0]


def test_the_three_origins_of_one_out_of_range_gain(tmp_path, capsys):
    """--gain 250 passes the dB parser (|x| <= 400) and is stopped by the option's limit, |G| <= 200."""
    accepted = "accepted: a gain in dB, |G| <= 200"
    code, _, err = run(["noise", "--band", "20:20k", "--gain", "250"], capsys)
    assert code == 2 and err.strip() == f"audiobw: error: --gain: '250' is out of range; {accepted}"
    cfg = tmp_path / "chain.toml"
    cfg.write_text("[amplifier]\ngain = 250\n", encoding="utf-8")
    code, _, err = run(["noise", "--band", "20:20k", "--chain", cfg], capsys)
    assert code == 2 and err.strip() == f"audiobw: error: {cfg} [amplifier] gain: 250 is out of range; {accepted}"
    with pytest.raises(ParameterError, match=r"^Chain\.gain_db: 250\.0 is out of range; accepted: a gain in dB"):
        Chain(gain_db=250.0)


def test_the_origin_follows_the_value_that_won(tmp_path):
    cfg = tmp_path / "chain.toml"
    cfg.write_text("[meter]\ntone_level = 2\n", encoding="utf-8")
    with pytest.raises(ParameterError, match=rf"^{re.escape(str(cfg))} \[meter\] tone_level: 2 is out of range"):
        build(merge(load_toml(cfg), {"max_loss": "0.1"}))
    assert build(merge(load_toml(cfg), {"tone_level": "-3", "max_loss": "0.1"})).meter.tone_level_dbfs == -3.0
    cfg.write_text("[meter]\ntone_level = -3\n", encoding="utf-8")
    with pytest.raises(ParameterError, match=r"^--tone-level: '2' is out of range; accepted: a level <= 0 dBFS$"):
        build(merge(load_toml(cfg), {"tone_level": "2"}))


def test_the_elliptic_stopband_above_the_ripple_is_named_by_its_origin(tmp_path):
    cfg = tmp_path / "grid.toml"
    cfg.write_text("[grid]\nfamily = 'elliptic'\nripple = 1\nstopband = 0.5\n", encoding="utf-8")
    with pytest.raises(ParameterError, match=rf"^{re.escape(str(cfg))} \[grid\] stopband: 0\.5 is out of range; "):
        build(load_toml(cfg))
    with pytest.raises(ParameterError, match=r"^--stopband: '0.5dB' is out of range; accepted: an elliptic stopband"):
        build(merge(load_toml(cfg), {"stopband": "0.5dB"}))
    assert build(merge(load_toml(cfg), {"family": "butterworth"})).grid_value("stopband") == 0.5


def test_library_checks_name_the_field_not_a_flag():
    assert Chain(bits=np.int64(16), gain_db=np.float32(20.0)).bits == 16  # numpy numbers are numbers
    with pytest.raises(ParameterError, match=r"^Chain\.bits: True is not a number"):
        Chain(bits=True)
    for kw, field in ((dict(bits=40), "bits"), (dict(temperature_k=0.0), "temperature_k"), (dict(h3_db=1.0), "h3_db")):
        with pytest.raises(ParameterError) as exc:
            Chain(**kw)
        assert str(exc.value).startswith(f"Chain.{field}: ") and "--" not in str(exc.value)


# -- JSON round trip ---------------------------------------------------------------------------


def round_trip(s: Settings) -> Settings:
    return Settings.from_json(json.loads(json.dumps(s.to_json(), allow_nan=False)))


def test_default_settings_round_trip():
    s = build({"max_loss": Raw("0.1", "--max-loss")})
    back = round_trip(s)
    assert back == s and back.chain == Chain() and back.to_json() == json.loads(json.dumps(s.to_json()))
    assert options_hash(back.to_json()) == options_hash(s.to_json())


def test_a_study_of_every_part_round_trips(tmp_path):
    table = tmp_path / "en.csv"
    table.write_text("frequency_Hz,e_n\n10,8e-9\n100,3e-9\n10000,1.2e-9\n", encoding="utf-8")
    raw = {
        "source_ohms": "150",
        "temperature": "27C",
        "gain": "52",
        "en_table": str(table),
        "in": "1.5p",
        "in_corner": "300",
        "h2": "-100",
        "bits": "16",
        "full_scale": "+4dBu",
        "stage": "digital",
        "anti_alias": "ideal",
        "response": "bp",
        "family": "butterworth,elliptic",
        "order": "2,4",
        "low_edges": "50:300:4",
        "high_edges": "3k:12k:5",
        "ripple": "0.5",
        "tie": "2%",
        "program": "speech",
        "playback_spl": "70",
        "hearing_threshold": "500:10,1000:20,4000:45",
        "input_level": "-18dBFS",
        "meter": "aes17",
        "tone": "1k",
        "max_flatness": "1",
    }
    s = build({k: Raw(v, OPTIONS[k].flag) for k, v in raw.items()})
    assert s.chain.en_table is not None and s.listening.audiogram_hl and s.default_targets == ("min_sii",)
    back = round_trip(s)
    assert back == s
    assert back.grid_for(24000.0) == s.grid_for(24000.0)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    chain=st.fixed_dictionaries(
        {},
        optional={
            "source_ohms": st.floats(0, 1e6),
            "temperature": st.floats(1, 1000),
            "gain": st.floats(-200, 200),
            "en": st.floats(0, 1e-6),
            "in": st.floats(0, 1e-9),
            "h3": st.floats(-200, -0.01),
            "bits": st.integers(1, 32),
            "full_scale": st.floats(1e-3, 100),
            "dither": st.sampled_from(["tpdf", "none"]),
            "stage": st.sampled_from(["analog", "digital"]),
            "amp_bandwidth": st.floats(1, 1e6),
            "en_corner": st.floats(0.01, 1e4),
        },
    ),
    grid=st.fixed_dictionaries(
        {},
        optional={
            "family": st.lists(st.sampled_from(["butterworth", "bessel", "chebyshev1"]), min_size=1, unique=True),
            "order": st.lists(st.integers(1, 8), min_size=1, max_size=3, unique=True),
            "cutoffs": st.lists(st.floats(100, 20000), min_size=1, max_size=5),
            "ripple": st.floats(0.01, 2.99),
            "rank": st.sampled_from(["enbw", "bandwidth"]),
        },
    ),
    targets=st.fixed_dictionaries(
        {"max_loss": st.floats(0.001, 3)}, optional={"min_snr": st.floats(-50, 150), "max_lsd": st.floats(0, 20)}
    ),
    level=st.one_of(st.none(), st.floats(-60, 0).map(lambda x: f"{x!r}dBFS"), st.floats(-20, 20)),
)
def test_any_settings_round_trip_through_json(chain, grid, targets, level):
    raw = {k: Raw(v, OPTIONS[k].flag) for k, v in {**chain, **grid, **targets}.items()}
    if level is not None:
        raw["input_level"] = Raw(level, OPTIONS["input_level"].flag)
    s = build(raw)
    back = round_trip(s)
    assert back == s
    assert json.dumps(back.to_json(), sort_keys=True) == json.dumps(s.to_json(), sort_keys=True)


# -- one grid of cases per sweep ---------------------------------------------------------------------------


def test_a_sweep_builds_its_cases_once(write_audio, monkeypatch):
    """The grid is built and validated once per file (before the analysis), not again when scoring."""
    from audiobw import jobs, sweep

    fs = 48000
    path = write_audio("t.wav", tones([440.0, 3000.0], [0.2, 0.05], fs, 1.0) + 1e-4 * np.ones(fs), fs)
    calls = []
    real = sweep.Grid.specs

    def counted(self, **kw):
        calls.append(kw)
        return real(self, **kw)

    monkeypatch.setattr(sweep.Grid, "specs", counted)
    s = build({"cutoffs": Raw("2k:16k:3", "--cutoffs"), "max_loss": Raw("1", "--max-loss")})
    doc, _ = jobs.sweep_file(path, s, use_cache=False)
    assert len(calls) == 1 and len(doc["cases"]) == 3


def test_an_edge_above_the_files_nyquist_is_named_by_its_origin(write_audio, tmp_path):
    """The edges can only be checked against a file's sample rate, at the sweep: still named by origin."""
    from audiobw import jobs

    fs = 48000
    path = write_audio("t.wav", tones([440.0], [0.2], fs, 0.5), fs)
    cfg = tmp_path / "grid.toml"
    cfg.write_text("[grid]\ncutoffs = '10k:30k:3'\n[targets]\nmax_loss = 1\n", encoding="utf-8")
    with pytest.raises(ParameterError, match=rf"^{re.escape(str(cfg))} \[grid\] cutoffs: edge 30000 Hz must be"):
        jobs.sweep_file(path, build(load_toml(cfg)), use_cache=False)
    with pytest.raises(ParameterError, match=r"^--cutoffs: edge 25000 Hz must be"):
        jobs.sweep_file(path, build(merge(load_toml(cfg), {"cutoffs": "10k:25k:2"})), use_cache=False)
    cfg.write_text("[grid]\nresponse = 'bandpass'\nlow_edges = '5k'\nhigh_edges = '1k,2k'\n", encoding="utf-8")
    s = build(merge(load_toml(cfg), {"max_loss": "1"}))
    with pytest.raises(
        ParameterError, match=rf"^{re.escape(str(cfg))} \[grid\] low_edges/.*\[grid\] high_edges: no pair"
    ):
        jobs.sweep_file(path, s, use_cache=False)
    assert s.origins["low_edges"].endswith("[grid] low_edges") and "origins" not in s.to_json()
    assert Settings.from_json(s.to_json()) == s  # the origins are not part of the JSON form, nor of equality

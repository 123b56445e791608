"""The one metric table: every key list of the program is derived from it."""

import pytest

from audiobw import batch, clikit, metrics, options, registry, settings, sweep
from audiobw.registry import Column, Metric, Target
from audiobw.report import spec, sweepio, text


def test_every_key_list_comes_from_the_registry():
    assert sweep.CASE_KEYS[9:] == registry.keys(1) + ("passes", "fails", "margins_db") + registry.keys(2)
    assert sweep.DATA_CASE_KEYS == registry.keys(3)
    assert metrics.TARGET_KEYS == registry.TARGET_KEYS and metrics.TARGET_METRIC == registry.TARGET_METRIC
    assert settings.TARGET_OPTION == registry.TARGET_OPTION and clikit.TARGETS == tuple(registry.TARGET_OPTION)
    assert text.TARGET_LABEL is registry.TARGET_LABEL
    assert {k: (o.section, o.kind, o.help, o.field) for k, o in options.OPTIONS.items() if o.section == "targets"} == {
        k: (s, kind, text, f"Targets.{key}") for k, (s, kind, text, key) in registry.target_options().items()
    }
    assert text.COLUMNS[5:] == registry.columns("audio") and text.DATA_COLUMNS[5:] == registry.columns("data")
    assert set(registry.keys(1, "csv")) <= set(sweepio.CSV_KEYS)
    assert set(registry.keys(1, "summary")) <= set(spec.SUMMARY_KEYS)
    assert batch.MEDIAN_KEYS[2:] == registry.keys(1, "median") and batch.DATA_KEYS == registry.keys(3, "median")


def test_entries_are_whole():
    assert len({m.key for m in registry.METRICS}) == len(registry.METRICS)
    ranks = [t.rank for t, _ in registry.TARGETS]
    assert len(set(ranks)) == len(ranks)
    for t, m in registry.TARGETS:
        assert t.sense in (+1, -1) and t.option in options.OPTIONS and m.label and t.help.startswith("target")
    for table in ("audio", "data"):
        for header, _unit, _key, fmt, target in registry.columns(table):
            assert header and (target is None or target in registry.TARGET_KEYS)
            fmt.format(1 if fmt.endswith("d}") else 1.5)  # a format that formats a number


def test_one_entry_adds_a_metric_everywhere(monkeypatch):
    # the throwaway metric of the registry's promise: one entry, and every derived list has it
    extra = Metric(
        "hum_db",
        "mains hum",
        "dB",
        2,
        Target("max_hum_db", "max_hum", -1, "db_any", "target: maximum mains hum, dB", 99, True),
        Column("hum", "dB", "{:>6.1f}", audio=99),
        csv=True,
    )
    monkeypatch.setattr(registry, "METRICS", registry.METRICS + (extra,))
    assert registry.keys(2)[-1] == "hum_db" and "hum_db" in registry.keys(2, "csv")
    assert registry.columns("audio")[-1] == ("hum", "dB", "hum_db", "{:>6.1f}", "max_hum_db")
    assert "hum_db" not in registry.keys(2, "median")


@pytest.mark.parametrize(
    "key,words",
    [
        ("max_loss_db", ("program loss", "loss_db", "dB", "≤")),
        ("min_sii", ("speech intelligibility index", "sii", "", "≥")),
    ],
)
def test_verdict_words(key, words):
    assert registry.TARGET_LABEL[key] == words

"""The public names agree everywhere: options <-> target keys <-> schema <-> docs.

Tolerant of entries added later, as long as each is added in every place.
"""

import json
import re

from audiobw.metrics import TARGET_KEYS, TARGET_METRIC
from audiobw.options import OPTIONS, option_name
from audiobw.settings import TARGET_OPTION
from audiobw.sweep import CASE_KEYS, DATA_CASE_KEYS

from .conftest import REPO

SCHEMA = json.loads((REPO / "docs" / "sweep.schema.json").read_text(encoding="utf-8"))
DOCS = (REPO / "docs" / "metrics.md").read_text(encoding="utf-8") + (REPO / "docs" / "sweep-json.md").read_text(
    encoding="utf-8"
)


def test_every_target_option_maps_to_a_target_key():
    target_options = {k for k, o in OPTIONS.items() if o.section == "targets"}
    assert target_options == set(TARGET_OPTION)
    assert set(TARGET_OPTION.values()) == set(TARGET_KEYS)
    assert set(TARGET_METRIC) == set(TARGET_KEYS)


def test_every_target_key_is_in_the_schema():
    assert set(TARGET_KEYS) <= set(SCHEMA["$defs"]["target"]["enum"])


def test_every_target_key_and_option_is_documented():
    for option, key in TARGET_OPTION.items():
        assert re.search(rf"\b{key}\b", DOCS), f"{key} is not in docs/metrics.md or docs/sweep-json.md"
        assert option_name(option) in DOCS, f"{option_name(option)} is not in docs/metrics.md or docs/sweep-json.md"


def test_every_target_metric_is_a_case_key():
    for key, (metric, sense) in TARGET_METRIC.items():
        assert metric in CASE_KEYS or metric in DATA_CASE_KEYS, key
        assert sense in (+1, -1)


def test_every_case_key_is_in_the_schema():
    props = SCHEMA["properties"]["cases"]["items"]["properties"]
    assert [k for k in CASE_KEYS + DATA_CASE_KEYS if k not in props] == []


def test_conflicts_agree_between_code_schema_and_docs():
    from audiobw.sweep import CONFLICT_EDGES

    conf = SCHEMA["properties"]["conflicts"]["items"]
    assert set(conf["required"]) == {"targets", "edge", "needs"}
    assert set(conf["properties"]["edge"]["enum"]) == set(CONFLICT_EDGES) | {None}
    assert set(conf["properties"]["needs"]["additionalProperties"]["required"]) == {"bound", "edge_hz"}
    for word in ("conflicts", "edge", "needs", "bound", "edge_hz", *CONFLICT_EDGES):
        assert re.search(rf"\b{word}\b", DOCS), f"{word} is not in docs/metrics.md or docs/sweep-json.md"
    spec_schema = json.loads((REPO / "docs" / "spec.schema.json").read_text(encoding="utf-8"))
    assert "conflicts" in spec_schema["properties"]


def test_every_chain_field_is_in_the_schema_and_the_docs():
    """sweep.json's chain object: every Chain field (anti_alias included) in the schema and in
    docs/sweep-json.md, and the anti-alias option's choices are the model's."""
    from audiobw.chain import ANTI_ALIAS, Chain

    props = SCHEMA["properties"]["chain"]["properties"]
    assert [k for k in Chain.field_names() if k not in props] == []
    assert [k for k in Chain.field_names() if not re.search(rf"\b{k}\b", DOCS)] == []
    assert set(props["anti_alias"]["enum"]) == set(ANTI_ALIAS) == set(OPTIONS["anti_alias"].choices)
    assert "anti_alias" in SCHEMA["properties"]["chain"]["required"]
    assert Chain().anti_alias == "none"  # the default the docs and the verdict state
    assert option_name("anti_alias") in DOCS

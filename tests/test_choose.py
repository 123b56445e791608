"""The choice rule (audiobw.choice.choose) on plain rows, one tie-break per test.

The rule (audiobw/choice.py docstring): among passing cases the narrowest
-3 dB bandwidth; ties go to the lower ENBW, then the lower order, then the
earlier case; the binding target is the one with the least margin; with no
passing case there is no choice, ``unmet`` names the targets no case meets
even on its own with the best value any case reached, and ``conflicts``
(audiobw.choice.conflicts) the targets that each hold somewhere but never
together, with the edge where each flips.
"""

from audiobw.report.text import conflict_text
from audiobw.sweep import choose, conflicts


def row(id, bw, *, enbw=None, order=4, family="butterworth", passes=True, margins=None, fails=(), **metrics):
    return {
        "id": id,
        "family": family,
        "order": order,
        "bandwidth_hz": bw,
        "enbw_hz": bw * 1.03 if enbw is None else enbw,
        "passes": passes,
        "fails": list(fails),
        "margins_db": dict(margins or {"max_loss_db": 0.05}),
        **metrics,
    }


TARGETS = {"max_loss_db": 0.1}


def test_narrowest_passing_case_wins():
    cases = [
        row(1, 20000.0),
        row(2, 8000.0),
        row(3, 4000.0, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.2}),
    ]
    choice, unmet = choose(cases, TARGETS)
    assert choice["case"] == 2 and unmet == {}


def test_equal_bandwidth_goes_to_lower_enbw():
    cases = [row(1, 8000.0, enbw=8800.0), row(2, 8000.0, enbw=8300.0)]
    assert choose(cases, TARGETS)[0]["case"] == 2


def test_equal_bandwidth_and_enbw_goes_to_lower_order():
    cases = [row(1, 8000.0, enbw=8300.0, order=6), row(2, 8000.0, enbw=8300.0, order=2)]
    assert choose(cases, TARGETS)[0]["case"] == 2


def test_full_tie_goes_to_the_earlier_case():
    cases = [row(1, 8000.0, enbw=8300.0, family="bessel"), row(2, 8000.0, enbw=8300.0)]
    assert choose(cases, TARGETS)[0]["case"] == 1


def test_binding_target_is_the_least_margin():
    margins = {"max_loss_db": 0.4, "min_snr_a_db": 0.02, "max_lsd_db": 1.5}
    choice, _ = choose([row(1, 8000.0, margins=margins)], {"max_loss_db": 0.1, "min_snr_a_db": 80, "max_lsd_db": 3})
    assert choice["binding"] == "min_snr_a_db"
    assert choice["binding_margin_db"] == 0.02


def test_next_narrower_is_the_widest_narrower_case_of_the_same_design():
    cases = [
        row(1, 16000.0),
        row(2, 8000.0),
        row(3, 6000.0, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.1}),
        row(4, 4000.0, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.5}),
        row(5, 7000.0, order=2, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.2}),
    ]
    choice, _ = choose(cases, TARGETS)
    assert choice["case"] == 2
    assert choice["next_narrower"] == 3 and choice["next_narrower_fails"] == ["max_loss_db"]
    assert choice["grid_limited"] is False


def test_narrowest_of_the_grid_is_grid_limited():
    choice, _ = choose([row(1, 16000.0), row(2, 8000.0)], TARGETS)
    assert choice["case"] == 2 and choice["next_narrower"] is None and choice["grid_limited"] is True


def test_no_passing_case_is_unmet_with_the_best_value_reached():
    cases = [
        row(1, 16000.0, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.3}, loss_db=0.4),
        row(2, 8000.0, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.9}, loss_db=1.0),
    ]
    choice, unmet = choose(cases, TARGETS)
    assert choice is None
    assert unmet == {"max_loss_db": 0.4}


def test_unmet_names_only_targets_no_case_meets_alone_with_the_sense_of_each():
    # case 1 fails only SNR; case 2 fails both: loss holds in case 1, so only SNR is unmet
    cases = [
        row(
            1,
            16000.0,
            passes=False,
            fails=["min_snr_db"],
            margins={"min_snr_db": -6.0, "max_loss_db": 0.1},
            snr_db=74.0,
            loss_db=0.0,
        ),
        row(
            2,
            8000.0,
            passes=False,
            fails=["min_snr_db", "max_loss_db"],
            margins={"min_snr_db": -1.0, "max_loss_db": -0.5},
            snr_db=79.0,
            loss_db=0.6,
        ),
    ]
    targets = {"min_snr_db": 80, "max_loss_db": 0.1}
    choice, unmet = choose(cases, targets)
    assert choice is None
    assert unmet == {"min_snr_db": 79.0}  # the best SNR reached is the max
    assert conflicts(cases, targets) == []  # one target alone holds nowhere: nothing to conflict


def lowpass(id, high, *, fails, family="butterworth", order=4):
    return {
        **row(
            id,
            high,
            family=family,
            order=order,
            passes=not fails,
            fails=fails,
            margins={k: (-1.0 if k in fails else 1.0) for k in ("min_snr_a_db", "max_lsd_db")},
        ),
        "low_hz": None,
        "high_hz": high,
    }


#: a lowpass sweep where SNR-A holds up to 3 kHz and LSD from 20 kHz: each holds, never both
SPLIT = [
    lowpass(1, 2000.0, fails=["max_lsd_db"]),
    lowpass(2, 3000.0, fails=["max_lsd_db"]),
    lowpass(3, 8000.0, fails=["min_snr_a_db", "max_lsd_db"]),
    lowpass(4, 20000.0, fails=["min_snr_a_db"]),
    lowpass(5, 22000.0, fails=["min_snr_a_db"]),
]
SPLIT_TARGETS = {"min_snr_a_db": 75.0, "max_lsd_db": 1.0}


def test_targets_that_each_hold_but_never_together_are_a_conflict_not_unmet():
    choice, unmet = choose(SPLIT, SPLIT_TARGETS)
    assert choice is None and unmet == {}
    assert conflicts(SPLIT, SPLIT_TARGETS) == [
        {
            "targets": ["min_snr_a_db", "max_lsd_db"],
            "edge": "high_hz",
            "needs": {
                "min_snr_a_db": {"bound": "max", "edge_hz": 3000.0},
                "max_lsd_db": {"bound": "min", "edge_hz": 20000.0},
            },
        }
    ]


def test_conflict_reads_as_the_edge_where_each_target_flips():
    (c,) = conflicts(SPLIT, SPLIT_TARGETS)
    assert conflict_text(c, SPLIT_TARGETS) == (
        "Conflict: A-weighted SNR ≥ 75 dB needs an upper −3 dB edge ≤ 3 kHz; "
        "log-spectral distance ≤ 1 dB needs ≥ 20 kHz (each holds in some case, never both in one)."
    )


def test_highpass_conflict_parts_on_the_lower_edge_with_the_bounds_swapped():
    def hp(id, low, fails):
        return {**lowpass(id, 24000.0 - low, fails=fails), "low_hz": low, "high_hz": None}

    cases = [hp(1, 20.0, ["min_snr_a_db"]), hp(2, 200.0, ["min_snr_a_db", "max_lsd_db"]), hp(3, 400.0, ["max_lsd_db"])]
    (c,) = conflicts(cases, SPLIT_TARGETS)
    assert c["edge"] == "low_hz"
    assert c["needs"] == {
        "min_snr_a_db": {"bound": "min", "edge_hz": 400.0},
        "max_lsd_db": {"bound": "max", "edge_hz": 20.0},
    }


def test_a_conflict_with_overlapping_edges_parts_on_design_and_says_so():
    # SNR-A holds only in the Bessel sweep, LSD only in the elliptic one, at overlapping edges
    cases = [
        lowpass(1, 4000.0, fails=["max_lsd_db"], family="bessel"),
        lowpass(2, 9000.0, fails=["max_lsd_db"], family="bessel"),
        lowpass(3, 5000.0, fails=["min_snr_a_db"], family="elliptic"),
        lowpass(4, 8000.0, fails=["min_snr_a_db"], family="elliptic"),
    ]
    (c,) = conflicts(cases, SPLIT_TARGETS)
    assert c["edge"] is None and c["needs"]["max_lsd_db"] == {"bound": None, "edge_hz": None}
    assert "no single edge parts them" in conflict_text(c, SPLIT_TARGETS)


def test_unmet_and_conflict_together_and_a_met_pair_is_no_conflict():
    keys = ("min_snr_db", "max_loss_db", "max_lsd_db")

    def r(id, high, fails):
        return {
            **row(
                id,
                high,
                passes=False,
                fails=fails,
                margins={k: (-1.0 if k in fails else 1.0) for k in keys},
                snr_db=70.0 + id,
            ),
            "low_hz": None,
            "high_hz": high,
        }

    # SNR never holds; loss and LSD hold together in case 2: unmet SNR only, no conflict
    cases = [r(1, 4000.0, ["min_snr_db", "max_loss_db"]), r(2, 16000.0, ["min_snr_db"])]
    targets = {"min_snr_db": 80.0, "max_loss_db": 0.1, "max_lsd_db": 1.0}
    assert choose(cases, targets) == (None, {"min_snr_db": 72.0})
    assert conflicts(cases, targets) == []
    # now loss and LSD never meet together: SNR stays unmet and the pair is a conflict
    cases = [r(1, 4000.0, ["min_snr_db", "max_loss_db"]), r(2, 16000.0, ["min_snr_db", "max_lsd_db"])]
    assert choose(cases, targets)[1] == {"min_snr_db": 72.0}
    (c,) = conflicts(cases, targets)
    assert c["targets"] == ["max_loss_db", "max_lsd_db"] and c["edge"] == "high_hz"
    assert c["needs"] == {
        "max_loss_db": {"bound": "min", "edge_hz": 16000.0},
        "max_lsd_db": {"bound": "max", "edge_hz": 4000.0},
    }


def test_three_targets_that_meet_in_pairs_but_never_all_three_are_one_conflict():
    keys = ("min_snr_db", "max_loss_db", "max_lsd_db")

    def r(id, fails):
        return {
            **row(id, 1000.0 * id, passes=False, fails=fails, margins={k: (-1.0 if k in fails else 1.0) for k in keys}),
            "low_hz": None,
            "high_hz": 1000.0 * id,
        }

    cases = [r(1, ["min_snr_db"]), r(2, ["max_loss_db"]), r(3, ["max_lsd_db"])]
    targets = dict.fromkeys(keys, 1.0)
    assert choose(cases, targets) == (None, {})
    (c,) = conflicts(cases, targets)
    assert c["targets"] == list(keys) and c["edge"] is None
    assert "never all in one" in conflict_text(c, targets)


def test_no_conflicts_when_a_case_passes():
    assert conflicts([row(1, 8000.0)], TARGETS) == []


def test_end_to_end_sweep_of_a_bundled_clip_prints_the_conflict_not_cannot_be_met(tmp_path, capsys):
    """The ensemble clip: SNR-A >= 74 dB holds only at narrow edges, LSD <= 1 dB only at the widest."""
    import json

    import jsonschema  # JSON Schema draft 2020-12 (jsonschema.Draft202012Validator)

    from audiobw.api import SweepResult
    from audiobw.cli import main

    from .conftest import REPO

    out_dir = tmp_path / "run"
    code = main(
        [
            "sweep",
            str(REPO / "clips" / "ensemble-48k-stereo.flac"),
            "--cutoffs",
            "2k:22k:8",
            "--min-snr-a",
            "74",
            "--max-lsd",
            "1",
            "--out",
            str(out_dir),
        ]
    )
    out = capsys.readouterr().out
    assert code == 0  # a finished sweep, even with no passing case
    doc = json.loads((out_dir / "sweep.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(
        json.loads((REPO / "docs" / "sweep.schema.json").read_text(encoding="utf-8"))
    ).validate(doc)
    # each target holds alone somewhere (read from the metric values, not from the fails lists) ...
    snr_ok = [c["high_hz"] for c in doc["cases"] if c["snr_a_db"] >= 74]
    lsd_ok = [c["high_hz"] for c in doc["cases"] if c["lsd_db"] <= 1]
    assert snr_ok and lsd_ok and max(snr_ok) < min(lsd_ok)
    # ... so nothing is unmet, and the conflict names the edge where each flips
    assert doc["choice"] is None and doc["unmet"] == {}
    assert doc["conflicts"] == [
        {
            "targets": ["min_snr_a_db", "max_lsd_db"],
            "edge": "high_hz",
            "needs": {
                "min_snr_a_db": {"bound": "max", "edge_hz": max(snr_ok)},
                "max_lsd_db": {"bound": "min", "edge_hz": min(lsd_ok)},
            },
        }
    ]
    assert "Cannot be met" not in out
    (line,) = [ln for ln in out.splitlines() if ln.startswith("Conflict:")]
    assert line.startswith("Conflict: A-weighted SNR ≥ 74 dB needs an upper −3 dB edge ≤ 2.8")
    assert "log-spectral distance ≤ 1 dB needs ≥ 22 kHz" in line
    assert SweepResult(doc).conflicts == doc["conflicts"]
    # the spec sheet carries the same sentence
    assert main(["report", str(out_dir)]) == 0
    capsys.readouterr()
    assert line.removeprefix("Conflict: ") in (out_dir / "spec.md").read_text(encoding="utf-8")
    spec = json.loads((out_dir / "spec.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(
        json.loads((REPO / "docs" / "spec.schema.json").read_text(encoding="utf-8"))
    ).validate(spec)
    assert spec["unmet"] == [] and spec["conflicts"][0]["edge"] == "high_hz"
    # read back, a hand-edited conflict is refused with its JSON pointer (audiobw.report.validate)
    import pytest

    from audiobw.errors import AudioFileError
    from audiobw.report.validate import validate_sweep

    validate_sweep(doc, out_dir / "sweep.json")
    bad = json.loads(json.dumps(doc))
    bad["conflicts"][0]["targets"][1] = "min_ser_db"  # a target that was not set
    with pytest.raises(AudioFileError, match=r"/conflicts/0/targets/1: \"min_ser_db\" is not a target"):
        validate_sweep(bad, out_dir / "sweep.json")
    bad = json.loads(json.dumps(doc))
    bad["conflicts"][0]["needs"]["max_lsd_db"]["bound"] = "above"
    with pytest.raises(AudioFileError, match=r"/conflicts/0/needs/max_lsd_db/bound"):
        validate_sweep(bad, out_dir / "sweep.json")


def test_property_unmet_and_conflicts_explain_every_failed_sweep():
    """For any table of which case meets which target (hypothesis): unmet targets hold nowhere; each
    conflict's targets hold alone but never all together while every smaller part of it does; the
    stated edge bounds hold for every case meeting each target; and a sweep with no passing case is
    always explained by at least one unmet target or one conflict."""
    from hypothesis import given, settings
    from hypothesis import strategies as st

    keys = ("min_snr_db", "min_snr_a_db", "max_loss_db", "max_lsd_db")

    @settings(max_examples=200, deadline=None)
    @given(
        st.lists(st.tuples(st.sets(st.sampled_from(keys)), st.integers(1, 40)), min_size=1, max_size=12),
        st.integers(2, 4),
    )
    def check(table, n_targets):
        targets = dict.fromkeys(keys[:n_targets], 1.0)
        cases = []
        for i, (held, step) in enumerate(table, start=1):
            fails = [k for k in targets if k not in held]
            cases.append(
                {
                    **row(
                        i,
                        500.0 * step,
                        passes=not fails,
                        fails=fails,
                        margins={k: (-1.0 if k in fails else 1.0) for k in targets},
                    ),
                    "low_hz": None,
                    "high_hz": 500.0 * step,
                }
            )
        choice, unmet = choose(cases, targets)
        found = conflicts(cases, targets)
        if choice is not None:
            assert unmet == {} and found == []
            return
        assert unmet or found
        for k in unmet:
            assert all(k in c["fails"] for c in cases)
        for conflict in found:
            ks = conflict["targets"]
            assert not set(ks) & set(unmet)
            assert not any(all(k not in c["fails"] for k in ks) for c in cases)
            for drop in ks:
                part = [k for k in ks if k != drop]
                assert any(all(k not in c["fails"] for k in part) for c in cases)
            if conflict["edge"] is not None:
                for k, need in conflict["needs"].items():
                    for c in cases:
                        if k not in c["fails"]:
                            v = c[conflict["edge"]]
                            assert v <= need["edge_hz"] if need["bound"] == "max" else v >= need["edge_hz"]

    check()


# --- the terminal table of a large sweep (audiobw.report.table.shown_cases) ---------------


def test_large_table_shows_one_row_per_design():
    from audiobw.report.text import TABLE_MAX_ROWS, case_table, shown_cases

    cases, i = [], 0
    for family in ("butterworth", "bessel"):
        for order in (2, 4):
            for k in range(40):  # 160 cases > TABLE_MAX_ROWS
                i += 1
                bw = 2000.0 + 100.0 * k
                # bessel order 4 never passes; its margin grows with the bandwidth
                ok = not (family == "bessel" and order == 4) and k >= 10 + order
                margin = (k - 45) * 0.01 if not ok else 0.05
                cases.append(
                    row(
                        i,
                        bw,
                        order=order,
                        family=family,
                        passes=ok,
                        response="lowpass",
                        low_hz=None,
                        high_hz=bw,
                        margins={"max_loss_db": margin},
                        fails=() if ok else ("max_loss_db",),
                    )
                )
    assert len(cases) > TABLE_MAX_ROWS
    doc = {"cases": cases, "choice": {"case": 13}}
    shown, note = shown_cases(doc)
    ids = [c["id"] for c in shown]
    # narrowest passing of each design: butterworth 2 -> k=12 (id 13), butterworth 4 -> k=14 (id 55),
    # bessel 2 -> k=12 (id 93); bessel 4 has none passing: its closest is its widest case (id 160)
    assert ids == [13, 55, 93, 160]
    assert note.startswith("(4 of 160 cases shown")
    text = case_table(doc)
    assert "<== chosen" in text and note in text
    assert len(text.splitlines()) == 2 + 4 + 2
    # at or below the limit every case is shown and nothing is said
    small = {"cases": cases[:TABLE_MAX_ROWS], "choice": None}
    assert shown_cases(small) == (small["cases"], None)

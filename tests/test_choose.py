"""The choice rule (audiobw.sweep.choose) on plain rows, one tie-break per test.

The rule (audiobw/sweep.py docstring): among passing cases the narrowest
-3 dB bandwidth; ties go to the lower ENBW, then the lower order, then the
earlier case; the binding target is the one with the least margin; with no
passing case there is no choice and ``unmet`` names the failed targets with
the best value any case reached.
"""

from audiobw.sweep import choose


def row(id, bw, *, enbw=None, order=4, family="butterworth", passes=True, margins=None, fails=(), **metrics):
    return {"id": id, "family": family, "order": order, "bandwidth_hz": bw,
            "enbw_hz": bw * 1.03 if enbw is None else enbw, "passes": passes,
            "fails": list(fails), "margins_db": dict(margins or {"max_loss_db": 0.05}), **metrics}


TARGETS = {"max_loss_db": 0.1}


def test_narrowest_passing_case_wins():
    cases = [row(1, 20000.0), row(2, 8000.0), row(3, 4000.0, passes=False, fails=["max_loss_db"],
                                                          margins={"max_loss_db": -0.2})]
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
    choice, _ = choose([row(1, 8000.0, margins=margins)], {"max_loss_db": 0.1, "min_snr_a_db": 80,
                                                           "max_lsd_db": 3})
    assert choice["binding"] == "min_snr_a_db"
    assert choice["binding_margin_db"] == 0.02


def test_next_narrower_is_the_widest_narrower_case_of_the_same_design():
    cases = [row(1, 16000.0), row(2, 8000.0),
             row(3, 6000.0, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.1}),
             row(4, 4000.0, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.5}),
             row(5, 7000.0, order=2, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.2})]
    choice, _ = choose(cases, TARGETS)
    assert choice["case"] == 2
    assert choice["next_narrower"] == 3 and choice["next_narrower_fails"] == ["max_loss_db"]
    assert choice["grid_limited"] is False


def test_narrowest_of_the_grid_is_grid_limited():
    choice, _ = choose([row(1, 16000.0), row(2, 8000.0)], TARGETS)
    assert choice["case"] == 2 and choice["next_narrower"] is None and choice["grid_limited"] is True


def test_no_passing_case_is_unmet_with_the_best_value_reached():
    cases = [row(1, 16000.0, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.3}, loss_db=0.4),
             row(2, 8000.0, passes=False, fails=["max_loss_db"], margins={"max_loss_db": -0.9}, loss_db=1.0)]
    choice, unmet = choose(cases, TARGETS)
    assert choice is None
    assert unmet == {"max_loss_db": 0.4}


def test_unmet_uses_the_compromise_case_failures_and_the_sense_of_each_target():
    # case 1 fails only SNR; case 2 fails both but by less on its worst margin
    cases = [row(1, 16000.0, passes=False, fails=["min_snr_db"], margins={"min_snr_db": -6.0, "max_loss_db": 0.1},
                 snr_db=74.0, loss_db=0.0),
             row(2, 8000.0, passes=False, fails=["min_snr_db", "max_loss_db"],
                 margins={"min_snr_db": -1.0, "max_loss_db": -0.5}, snr_db=79.0, loss_db=0.6)]
    choice, unmet = choose(cases, {"min_snr_db": 80, "max_loss_db": 0.1})
    assert choice is None
    # compromise = case 2 (worst margin -1.0 beats -6.0); best SNR reached is the max, best loss the min
    assert unmet == {"min_snr_db": 79.0, "max_loss_db": 0.0}

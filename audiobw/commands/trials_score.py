"""``audiobw trials-score``: score a blind trial set against its key.

Parsing and printing only; the work is in :func:`audiobw.render.score_trials`.
"""

from __future__ import annotations

from pathlib import Path

import click

from ..clikit import CONTEXT


@click.command("trials-score", context_settings=CONTEXT)
@click.argument("key", type=click.Path(path_type=Path))
@click.argument("answers", type=click.Path(path_type=Path))
@click.option("--json", "as_json", is_flag=True, help="Print the score as JSON.")
def command(key, answers, as_json):
    """Score ANSWERS (lines 'NN first|second') against KEY (trial-key.json from `audiobw render --trials`).

    Reports the right answers, the one-sided binomial p-value against chance
    (1/2 per trial) and what it means.
    """
    from ..render import score_trials

    s = score_trials(key, answers)
    if as_json:
        import json

        click.echo(json.dumps(s, indent=2))
        return
    click.echo(
        f"Answered {s['answered']} of {s['trials']} trials; {s['correct']} right; "
        f"one-sided binomial p = {s['p_value']:.4g}"
    )
    if s["unanswered"]:
        click.echo(f"Not answered: {', '.join(str(t) for t in s['unanswered'])}")
    click.echo(s["reading"])

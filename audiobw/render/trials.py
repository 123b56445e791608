"""Blind trials: the trial clips, key and answer sheet written by a render, and their scoring.

References
----------
.. [1] scipy.stats.binomtest (exact binomial test), SciPy reference guide.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np

from ..audio import write_audio_atomic, write_text_atomic
from ..errors import ParameterError
from .options import RenderOptions


KEY_FORMAT = "audiobw trial key 1"
CHOICES = ("first", "second")


def _write_trials(out_dir: Path, clips: dict, fs: int, options: RenderOptions, input_path):
    from ..cautions import LISTENING_CAUTION

    rng = np.random.default_rng(np.random.SeedSequence([int(options.seed), 0x7269]))
    blind = out_dir / "blind"
    rows, paths = [], []
    width = max(2, len(str(options.trials)))
    sheet = [
        "# audiobw blind trials: for each pair, write which file is the processed chain output,",
        "# 'first' or 'second', after the trial number. Lines starting with # are ignored.",
        "# " + LISTENING_CAUTION,
        "",
    ]
    for i in range(1, options.trials + 1):
        processed_first = bool(rng.integers(0, 2))
        order = ("processed", "reference") if processed_first else ("reference", "processed")
        names = {}
        for slot, which in zip(CHOICES, order):
            target = blind / f"trial-{i:0{width}d}-{slot}.wav"
            write_audio_atomic(target, clips[which], fs, subtype="FLOAT", inputs=[input_path])
            paths.append(target)
            names[slot] = target.name
        rows.append(
            {
                "trial": i,
                "first": order[0],
                "second": order[1],
                "processed": CHOICES[order.index("processed")],
                "files": names,
            }
        )
        sheet.append(f"{i:0{width}d} ")
    key = {
        "format": KEY_FORMAT,
        "question": "In each pair, which file is the processed chain output: first or second?",
        "seed": options.seed,
        "trials": rows,
    }
    key_path = out_dir / "trial-key.json"
    write_text_atomic(key_path, json.dumps(key, indent=2) + "\n", inputs=[input_path])
    sheet_path = blind / "answer-sheet.txt"
    write_text_atomic(sheet_path, "\n".join(sheet) + "\n", inputs=[input_path])
    return {
        "count": options.trials,
        "folder": "blind",
        "key": key_path.name,
        "answer_sheet": f"blind/{sheet_path.name}",
    }, paths + [key_path, sheet_path]


# -- scoring blind trials ----------------------------------------------------------------

_TRIAL_RE = re.compile(r"[0-9]{1,6}")  # ASCII digits only: str.isdigit() takes '²'


def _trial_list(known) -> str:
    k = sorted(known)
    if k and k == list(range(k[0], k[-1] + 1)):
        return f"{k[0]} to {k[-1]}"
    return ", ".join(map(str, k[:20])) + (", ..." if len(k) > 20 else "")


def read_key(path) -> dict:
    """Read and check a ``trial-key.json``."""
    p = Path(path)
    try:
        key = json.loads(p.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise ParameterError(f"KEY: {str(p)!r}: no such file") from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ParameterError(f"KEY: {str(p)!r}: not a readable trial key ({exc})") from None
    if not isinstance(key, dict) or key.get("format") != KEY_FORMAT or not isinstance(key.get("trials"), list):
        raise ParameterError(
            f"KEY: {str(p)!r} is not an audiobw trial key; accepted: the trial-key.json "
            "that `audiobw render --trials N` writes"
        )
    seen = set()
    for i, t in enumerate(key["trials"]):
        n = t.get("trial") if isinstance(t, dict) else None
        if (
            not isinstance(t, dict)
            or not isinstance(n, int)
            or isinstance(n, bool)
            or not 1 <= n <= 100_000
            or n in seen
            or t.get("processed") not in ("first", "second")
        ):
            raise ParameterError(
                f"KEY: {str(p)!r}: trials[{i}] = {str(t)[:80]!r} is not a trial entry; accepted: "
                '{"trial": a whole number from 1, unique, "processed": "first" or "second"}'
            )
        seen.add(n)
    return key


def read_answers(path, n_trials) -> dict[int, str]:
    """Read an answer sheet: lines ``NN first|second`` (or ``1``/``2``); ``#`` starts a comment.

    ``n_trials`` is the number of trials (numbered 1..n) or the set of trial numbers in the key.
    """
    known = set(range(1, n_trials + 1)) if isinstance(n_trials, int) else set(n_trials)
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ParameterError(f"ANSWERS: {str(p)!r}: no such file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ParameterError(f"ANSWERS: {str(p)!r}: cannot read ({exc})") from None
    answers: dict[int, str] = {}
    words = {"first": "first", "second": "second", "1": "first", "2": "second"}
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.split("#", 1)[0].replace(":", " ").strip()
        if not line:
            continue
        parts = line.split()
        if len(parts) == 1 and _TRIAL_RE.fullmatch(parts[0]):
            continue  # a trial left unanswered on the sheet
        if len(parts) != 2 or not _TRIAL_RE.fullmatch(parts[0]) or parts[1].lower() not in words:
            raise ParameterError(
                f"ANSWERS: {p} line {lineno}: {raw.strip()!r}; accepted: a trial number and "
                "'first' or 'second' (or 1 or 2), e.g. '03 second'"
            )
        trial = int(parts[0])
        if trial not in known:
            raise ParameterError(
                f"ANSWERS: {p} line {lineno}: trial {trial} is not in the key; accepted: {_trial_list(known)}"
            )
        if trial in answers:
            raise ParameterError(f"ANSWERS: {p} line {lineno}: trial {trial} is answered twice")
        answers[trial] = words[parts[1].lower()]
    return answers


def score_trials(key_path, answers_path, *, alpha: float = 0.05) -> dict:
    """Score a blind trial set.

    The listener names the processed clip of each pair; under the null
    hypothesis (no audible difference) each answer is right with probability
    1/2, so the count of right answers is binomial and the one-sided p-value
    is P(X >= correct) (scipy.stats.binomtest, alternative='greater').
    """
    from scipy import stats

    key = read_key(key_path)
    truth = {int(t["trial"]): t["processed"] for t in key["trials"]}
    answers = read_answers(answers_path, set(truth))
    if not answers:
        raise ParameterError(f"ANSWERS: {answers_path}: no trial is answered; accepted: lines such as '01 first'")
    correct = sum(1 for t, a in answers.items() if truth[t] == a)
    n = len(answers)
    p = float(stats.binomtest(correct, n, 0.5, alternative="greater").pvalue)
    if p <= alpha:
        reading = (
            f"Listeners told them apart more often than chance: {correct} of {n} right, "
            f"p = {p:.3g} (one-sided binomial, chance = 1/2)."
        )
    else:
        reading = (
            f"{correct} of {n} right, p = {p:.3g}: not more often than chance at the {alpha:g} level. "
            "This does not show the two sound the same; more trials make a more sensitive test."
        )
    if n < 5:
        reading += f" With {n} trials even a perfect score cannot reach p < 0.05 (it needs at least 5)."
    return {
        "trials": len(truth),
        "answered": n,
        "correct": correct,
        "p_value": p,
        "unanswered": sorted(set(truth) - set(answers)),
        "reading": reading,
    }

"""The one table of a case's figures: key, words, unit, target, and where each is shown.

Every list of metric keys elsewhere is derived from :data:`METRICS`: the
sweep.json case keys (:data:`audiobw.sweep.CASE_KEYS`), the CSV columns, the
terminal table, the target keys and their options (``--max-loss`` →
``max_loss_db``), the verdict's words, the spec sheet's summary and batch's
medians.  Adding a metric is one :class:`Metric` entry here, its computation
in :mod:`audiobw.metrics` (or :mod:`audiobw.perceptual`, :mod:`audiobw.datalink`)
and its test; ``tests/test_consistency.py`` then holds the schema and the docs
to it.

Standard library only: :mod:`audiobw.options` builds the target options from
it, and ``audiobw --help`` must stay light.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Target:
    """A limit a user can set on a metric.

    key : the library/JSON name (``max_loss_db``); option : the CLI/TOML name
    (``max_loss``, spelt ``--max-loss``); sense : +1 when the metric must be at
    least the limit, −1 at most; kind : the value parser of
    :func:`audiobw.units.parse_quantity` (or the settings' own kinds);
    rank : the order of targets (lists of failed targets; ties of the binding
    one go to the lower rank); fidelity : judges what reaches the listener
    (absent any, music and speech programs get a listening default).
    """

    key: str
    option: str
    sense: int
    kind: str
    help: str
    rank: int
    fidelity: bool = False


@dataclass(frozen=True)
class Column:
    """A column of the terminal table (and report.html's case table).

    ``audio``/``data``: its position in the music/speech table and in the
    data-program table (None: not shown there); ``show`` a derived key that
    :mod:`audiobw.report.table` computes for display (``eye_pct``).
    """

    header: str
    unit: str
    fmt: str
    audio: int | None = None
    data: int | None = None
    show: str | None = None


@dataclass(frozen=True)
class Metric:
    """One figure of a case row.

    block : where the key stands in a sweep.json case: 1 before the verdict
    keys (passes, fails, margins_db), 2 after them, 3 the data-program keys
    (present only for ``--program data``).  csv/summary/median: shown in
    sweep.csv, in spec.json's case summaries, and aggregated by median over
    the files of a batch.
    """

    key: str
    label: str
    unit: str
    block: int
    target: Target | None = None
    column: Column | None = None
    csv: bool = False
    summary: bool = False
    median: bool = False


def _t(key, option, sense, kind, help, rank, fidelity=False):
    return Target(key, option, sense, kind, help, rank, fidelity)


#: Every figure, in sweep.json order within its block.
METRICS: tuple[Metric, ...] = (
    Metric("bandwidth_hz", "−3 dB bandwidth", "Hz", 1, csv=True, summary=True, median=True),
    Metric(
        "enbw_hz",
        "ENBW",
        "Hz",
        1,
        column=Column("ENBW", "Hz", "{:>8.0f}", audio=6, data=6),
        csv=True,
        summary=True,
        median=True,
    ),
    Metric("noise_vrms", "noise", "V rms", 1, csv=True, summary=True, median=True),
    Metric(
        "noise_dbfs",
        "noise",
        "dBFS",
        1,
        column=Column("noise", "dBFS", "{:>7.1f}", audio=7),
        csv=True,
        summary=True,
        median=True,
    ),
    Metric(
        "snr_db",
        "SNR",
        "dB",
        1,
        _t("min_snr_db", "min_snr", +1, "db_any", "target: minimum SNR, dB", 1),
        Column("SNR", "dB", "{:>6.1f}", audio=8, data=26),
        csv=True,
        summary=True,
        median=True,
    ),
    Metric(
        "snr_a_db",
        "A-weighted SNR",
        "dB",
        1,
        _t("min_snr_a_db", "min_snr_a", +1, "db_any", "target: minimum A-weighted SNR, dB", 2),
        Column("SNR-A", "dB", "{:>6.1f}", audio=9),
        csv=True,
        summary=True,
        median=True,
    ),
    Metric(
        "loss_db",
        "program loss",
        "dB",
        1,
        _t("max_loss_db", "max_loss", -1, "db", "target: maximum program power removed, dB", 4, True),
        Column("loss", "dB", "{:>6.3f}", audio=10),
        csv=True,
        summary=True,
        median=True,
    ),
    Metric(
        "lsd_db",
        "log-spectral distance",
        "dB",
        1,
        _t("max_lsd_db", "max_lsd", -1, "db", "target: maximum log-spectral distance, dB", 5, True),
        Column("LSD", "dB", "{:>6.2f}", audio=11),
        csv=True,
        summary=True,
        median=True,
    ),
    Metric(
        "ser_db",
        "signal-to-error",
        "dB",
        1,
        _t("min_ser_db", "min_ser", +1, "db_any", "target: minimum signal-to-error ratio, dB", 6, True),
        Column("SER", "dB", "{:>6.1f}", audio=12),
        csv=True,
        summary=True,
        median=True,
    ),
    Metric(
        "thdn_pct",
        "THD+N",
        "%",
        1,
        _t("max_thdn_pct", "max_thdn", -1, "thdn", "target: maximum THD+N (0.05% or -66dB)", 3, True),
        Column("THD+N", "%", "{:>8.5f}", audio=13),
        csv=True,
        summary=True,
        median=True,
    ),
    Metric("thdn_db", "THD+N", "dB", 1, csv=True, median=True),
    Metric("thdn_note", "THD+N note", "", 1),
    Metric(
        "headroom_db",
        "headroom",
        "dB",
        2,
        _t(
            "min_headroom_db",
            "min_headroom",
            +1,
            "db_any",
            "target: minimum headroom, dB: converter full scale over the program's peak at the converter",
            9,
        ),
    ),
    Metric(
        "nmr_db",
        "noise-to-mask ratio",
        "dB",
        2,
        _t(
            "max_nmr_db",
            "max_nmr",
            -1,
            "db_any",
            "target: maximum total noise-to-mask ratio, dB (ITU-R BS.1387 sense)",
            10,
            True,
        ),
        Column("NMR", "dB", "{:>6.1f}", audio=14),
        csv=True,
    ),
    Metric(
        "audible_frames_pct",
        "audible frames",
        "%",
        2,
        _t(
            "max_audible_frames_pct",
            "max_audible_frames",
            -1,
            "percent",
            "target: maximum share of short frames whose error is above the masked threshold, % (music default: 1)",
            11,
            True,
        ),
        Column("aud", "%", "{:>5.1f}", audio=15),
        csv=True,
    ),
    Metric(
        "sii",
        "speech intelligibility index",
        "",
        2,
        _t(
            "min_sii",
            "min_sii",
            +1,
            "fraction",
            "target (speech): minimum Speech Intelligibility Index, 0 to 1 (ANSI S3.5-1997; speech default: 0.75)",
            12,
        ),
        Column("SII", "", "{:>5.3f}", audio=16),
        csv=True,
    ),
    Metric("wiener_gap_db", "gap to the Wiener bound", "dB", 2, csv=True),
    Metric("audible_band_hz", "band of the audible error", "Hz", 2),
    Metric("audible_band_pct", "frames audible in that band", "%", 2),
    Metric(
        "alias_rejection_db",
        "alias rejection",
        "dB",
        2,
        _t(
            "min_alias_rejection_db",
            "min_alias_rejection",
            +1,
            "db",
            "target (analog stage): minimum "
            "attenuation, dB, of what the converter folds into the passband (at fs − f_high for a "
            "monotonic lowpass)",
            13,
        ),
        Column("alias", "dB", "{:>6.1f}", audio=17),
        csv=True,
    ),
    Metric(
        "flatness_db",
        "passband flatness",
        "dB",
        2,
        _t(
            "max_flatness_db",
            "max_flatness",
            -1,
            "db",
            "target: maximum peak-to-peak gain over the program's 99 % occupied band, dB (e.g. 0.5)",
            14,
        ),
        Column("flat", "dB", "{:>6.2f}", audio=18),
        csv=True,
    ),
    Metric(
        "delay_spread_s",
        "group-delay spread",
        "s",
        2,
        _t(
            "max_delay_spread_s",
            "max_delay_spread",
            -1,
            "seconds",
            "target: maximum group-delay spread (max − min) over the program's 99 % occupied band, s (e.g. 200us, 1ms)",
            15,
        ),
        Column("Δτ", "µs", "{:>7.1f}", audio=19, show="delay_spread_us"),
        csv=True,
    ),
    Metric(
        "eye_fraction",
        "eye opening",
        "",
        3,
        _t(
            "min_eye",
            "min_eye",
            +1,
            "fraction",
            "target (data programs): minimum eye opening, fraction of the unfiltered one (0.6 or 60%)",
            8,
        ),
        Column("eye", "%", "{:>6.1f}", data=22, show="eye_pct"),
        median=True,
    ),
    Metric("eye_opening_v", "eye opening", "V", 3, median=True),
    Metric("sample_delay_ui", "sampling instant", "UI", 3, median=True),
    Metric(
        "noise_sigma_v",
        "noise σ",
        "V",
        3,
        column=Column("σ", "µV", "{:>8.2f}", data=21, show="noise_sigma_uv"),
        median=True,
    ),
    Metric("q", "Q", "", 3, column=Column("Q", "", "{:>8.3g}", data=23), median=True),
    Metric(
        "ber",
        "bit-error rate",
        "",
        3,
        _t("max_ber", "max_ber", -1, "probability", "target (data programs): maximum bit-error rate, e.g. 1e-9", 7),
        Column("BER", "", "{:>9.2e}", data=24),
        median=True,
    ),
    Metric("jitter_pp_ui", "jitter", "UI", 3, column=Column("jitter", "UI", "{:>7.3f}", data=25), median=True),
    Metric("ber_worst", "worst-pattern bit-error rate", "", 3),
    Metric("stream_sigma_v", "the recording's own noise σ", "V", 3),
    Metric("eye_ideal", "eye opening of the ideal pulse", "", 3),
    Metric("q_ideal", "Q of the ideal pulse", "", 3),
    Metric("ber_ideal", "bit-error rate of the ideal pulse", "", 3),
)

BY_KEY: dict[str, Metric] = {m.key: m for m in METRICS}

#: Targets in rank order, with their metric.
TARGETS: tuple[tuple[Target, Metric], ...] = tuple(
    sorted(((m.target, m) for m in METRICS if m.target is not None), key=lambda tm: tm[0].rank)
)

TARGET_KEYS: tuple[str, ...] = tuple(t.key for t, _ in TARGETS)
#: target key -> (metric key, sense): +1 means the metric must be at least the target.
TARGET_METRIC: dict[str, tuple[str, int]] = {t.key: (m.key, t.sense) for t, m in TARGETS}
#: CLI/TOML key -> target key (``max_loss`` -> ``max_loss_db``).
TARGET_OPTION: dict[str, str] = {t.option: t.key for t, _ in TARGETS}
#: target key -> (words, metric key, unit, sign) for verdicts.
TARGET_LABEL: dict[str, tuple[str, str, str, str]] = {
    t.key: (m.label, m.key, m.unit, "≥" if t.sense > 0 else "≤") for t, m in TARGETS
}
#: Targets on what reaches the listener.
FIDELITY_TARGETS: tuple[str, ...] = tuple(t.key for t, _ in TARGETS if t.fidelity)


def target_options() -> dict[str, tuple[str, str, str, str]]:
    """The target entries of :data:`audiobw.options.OPTIONS`: option key -> (section, kind, help, target key)."""
    return {t.option: ("targets", t.kind, t.help, t.key) for t, _ in TARGETS}


def keys(block: int, flag: str | None = None) -> tuple[str, ...]:
    """Metric keys of one block in sweep.json order, optionally only those with ``flag`` set."""
    return tuple(m.key for m in METRICS if m.block == block and (flag is None or getattr(m, flag)))


def columns(table: str) -> tuple[tuple[str, str, str, str, str | None], ...]:
    """Metric columns of the ``audio`` or ``data`` table in position order, as
    (header, unit, shown key, format, target key)."""
    placed = [(getattr(m.column, table), m) for m in METRICS if m.column and getattr(m.column, table) is not None]
    return tuple(
        (m.column.header, m.column.unit, m.column.show or m.key, m.column.fmt, m.target.key if m.target else None)
        for _, m in sorted(placed, key=lambda pm: pm[0])
    )


def worst_margin(case: dict) -> float:
    """A case's least target margin, dB (a target that cannot be evaluated counts as −∞;
    no target: −∞).  The closest case, when none passes, is the one where this is largest."""
    vals = list(case["margins_db"].values())
    return min((-float("inf") if v is None else v) for v in vals) if vals else -float("inf")


def closest_case(cases: list[dict]) -> dict:
    """With no case passing: the case whose worst target margin is largest (ties: the earlier case)."""
    return max(cases, key=lambda c: (worst_margin(c), -c["id"]))

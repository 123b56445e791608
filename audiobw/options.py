"""The public option table and name lists, free of heavy imports.

Every option of a study is one :class:`Option` record in :data:`OPTIONS`: its
TOML section, command-line spelling, value parser (kind), help text, default
(with its unit), limits, and the field of the typed model it fills
(``Chain.temperature_k``).  The CLI builds its options and their ``--help``
from it, the TOML loader accepts exactly these keys, :mod:`audiobw.settings`
checks every value against the limits naming where it came from (the option,
or the file and ``[section] key``), and the model classes take their defaults
and their own checks (naming the Python field) from it, so none of them can
drift apart.  Importing this module costs nothing beyond the standard library
(``audiobw --help`` stays fast).
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Any

from .errors import ParameterError
from .registry import target_options

FAMILIES = ("butterworth", "bessel", "chebyshev1", "elliptic")
FAMILY_ALIASES = {
    "butter": "butterworth",
    "bw": "butterworth",
    "cheby1": "chebyshev1",
    "chebyshev": "chebyshev1",
    "cheb1": "chebyshev1",
    "ellip": "elliptic",
    "cauer": "elliptic",
}
RESPONSES = ("lowpass", "highpass", "bandpass")
RESPONSE_ALIASES = {"lp": "lowpass", "hp": "highpass", "bp": "bandpass"}
STAGES = ("analog", "digital")
MIN_ORDER, MAX_ORDER = 1, 8


def _is_number(value) -> bool:
    """A real number (numpy's included), not a bool."""
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


@dataclass(frozen=True)
class Limit:
    """The range a parsed value must lie in, and the words that say so when it does not.

    ``low``/``high``: bounds in the option's base unit (None: unbounded),
    exclusive when ``low_open``/``high_open``; ``whole``: an integer.
    """

    accepted: str
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    high_open: bool = False
    whole: bool = False

    def holds(self, value) -> bool:
        if not _is_number(value):
            return False
        x = float(value)
        if not math.isfinite(x) or (self.whole and not x.is_integer()):
            return False
        if self.low is not None and (x <= self.low if self.low_open else x < self.low):
            return False
        return self.high is None or (x < self.high if self.high_open else x <= self.high)


@dataclass(frozen=True)
class Option:
    """One option: ``--key-with-dashes`` on the command line, ``key`` in the TOML ``[section]``.

    kind : the value parser (:func:`audiobw.units.parse_quantity` kinds, ``choice:a,b``
    or the settings' own kinds); default : the value used when the option is not
    given, in the base unit (None: none, or derived: see ``default_text``); unit :
    the default's unit in ``--help``; field : the typed model's field it fills
    (``Chain.temperature_k``; None: the settings use it directly).
    """

    key: str
    section: str
    kind: str
    help: str
    default: Any = None
    unit: str = ""
    limit: Limit | None = None
    field: str | None = None
    default_text: str | None = None

    @property
    def flag(self) -> str:
        """The command-line spelling: ``--source-ohms``."""
        return option_name(self.key)

    @property
    def choices(self) -> tuple[str, ...]:
        return tuple(self.kind.split(":", 1)[1].split(",")) if self.kind.startswith("choice:") else ()

    @property
    def shown_default(self) -> str | None:
        """The default as ``--help`` shows it, with its unit (``200 Ω``, ``1.5 nV/√Hz``); None: no default."""
        if self.default_text is not None:
            return self.default_text
        return None if self.default is None else _show(self.default, self.unit)

    @property
    def help_text(self) -> str:
        """The help text with the default appended."""
        shown = self.shown_default
        return self.help if shown is None else f"{self.help}  [default: {shown}]"

    def check(self, value, where: str, shown=None) -> None:
        """Refuse a parsed ``value`` outside this option's choices or limits.

        ``where`` names the value's origin (``--bits``, ``chain.toml [converter] bits``
        or ``Chain.bits``); ``shown`` is the value as given (default: ``value``).
        """
        shown = value if shown is None else shown
        if self.choices and value not in self.choices:
            raise ParameterError(f"{where}: {shown!r} is not accepted; accepted: {', '.join(self.choices)}")
        if self.limit is not None and not _is_number(value):
            raise ParameterError(f"{where}: {shown!r} is not a number; accepted: {self.limit.accepted}")
        if self.limit is not None and not self.limit.holds(value):
            raise ParameterError(f"{where}: {shown!r} is out of range; accepted: {self.limit.accepted}")


_PREFIXES = ((1e-12, "p"), (1e-9, "n"), (1e-6, "µ"), (1e-3, "m"), (1.0, ""))


def _show(value, unit: str) -> str:
    if isinstance(value, tuple):
        return ",".join(str(v) for v in value)
    if isinstance(value, str):
        return value
    if unit == "%":
        return f"{value * 100:g}%"
    if unit.endswith("/√Hz"):
        scale, prefix = next((s, p) for s, p in reversed(_PREFIXES) if value >= s or s == 1e-12)
        return f"{value / scale:g} {prefix}{unit}"
    return f"{value:g} {unit}".strip()


def default(key: str) -> Any:
    """The default value of option ``key`` (the model classes' field defaults)."""
    return OPTIONS[key].default


def _o(key, section, kind, help, default=None, unit="", limit=None, field=None, default_text=None) -> Option:
    return Option(key, section, kind, help, default, unit, limit, field, default_text)


def _nonneg(accepted: str) -> Limit:
    return Limit(accepted, low=0.0)


def _positive(accepted: str) -> Limit:
    return Limit(accepted, low=0.0, low_open=True)


#: How many log-spaced edges a default grid has (fitted to the sample rate: :meth:`audiobw.model.Settings.grid_for`).
DEFAULT_EDGE_COUNTS = {"cutoffs": 24, "low_edges": 8, "high_edges": 12}


#: Every option, keyed by its snake_case name.  Numbers are in base units (Ω, K, dB, V/√Hz, A/√Hz, V rms, Hz).
# fmt: off
OPTIONS: dict[str, Option] = {
    o.key: o
    for o in (
        _o("source_ohms", "source", "resistance", "source resistance Rs, Ω (e.g. 150, 2.2k; 0 = ideal source)",
           200.0, "Ω", _nonneg("a resistance >= 0 ohm"), "Chain.source_ohms"),
        _o("temperature", "source", "temperature", "source temperature, K or °C (e.g. 290, 27C)",
           290.0, "K", _positive("a temperature > 0 K"), "Chain.temperature_k"),
        _o("input_level", "source", "input_level",
           "rescale the program: its rms level at the converter input (-18dBFS, +4dBu, 0.5V) or a gain (6dB)",
           default_text="none (the program as it is at the converter)"),
        _o("gain", "amplifier", "gain_db", "amplifier voltage gain, dB (e.g. 40)",
           40.0, "dB", Limit("a gain in dB, |G| <= 200", -200.0, 200.0), "Chain.gain_db"),
        _o("en", "amplifier", "voltage_density", "amplifier input voltage noise, V/√Hz (e.g. 1.2n)",
           1.5e-9, "V/√Hz", _nonneg("a density >= 0 V/rtHz"), "Chain.en_v_rthz"),
        _o("in", "amplifier", "current_density", "amplifier input current noise, A/√Hz (e.g. 1.5p)",
           1.0e-12, "A/√Hz", _nonneg("a density >= 0 A/rtHz"), "Chain.in_a_rthz"),
        _o("h2", "amplifier", "gain_db", "2nd harmonic at full scale, dB re fundamental (e.g. -110)",
           limit=Limit("a harmonic level below 0 dB re the fundamental, e.g. -110", high=0.0, high_open=True),
           field="Chain.h2_db", default_text="none (a linear amplifier)"),
        _o("h3", "amplifier", "gain_db", "3rd harmonic at full scale, dB re fundamental (e.g. -120)",
           limit=Limit("a harmonic level below 0 dB re the fundamental, e.g. -120", high=0.0, high_open=True),
           field="Chain.h3_db", default_text="none (a linear amplifier)"),
        _o("en_corner", "amplifier", "frequency", "1/f corner of e_n, Hz: e_n(f)² = e_n²·(1 + fc/f)",
           limit=_positive("a frequency > 0 Hz"), field="Chain.en_corner_hz", default_text="none, white"),
        _o("en_table", "amplifier", "en_table",
           "measured e_n density, a CSV file of rows 'frequency_Hz,e_n_V_per_rtHz' "
           "(one header line allowed; TOML: a path relative to the TOML file): interpolated in log-log, held "
           "flat beyond both ends; replaces --en and --en-corner (its top row is the white level)"),
        _o("in_corner", "amplifier", "frequency", "1/f corner of i_n, Hz: i_n(f)² = i_n²·(1 + fc/f)",
           limit=_positive("a frequency > 0 Hz"), field="Chain.in_corner_hz", default_text="none, white"),
        _o("amp_bandwidth", "amplifier", "frequency", "amplifier's own -3 dB bandwidth, Hz (one pole)",
           limit=_positive("a frequency > 0 Hz"), field="Chain.amp_bandwidth_hz", default_text="unlimited"),
        _o("bits", "converter", "bits", "converter resolution, bits (1 to 32)",
           24, "bits", Limit("an integer 1 to 32", 1, 32, whole=True), "Chain.bits"),
        _o("full_scale", "converter", "voltage", "rms of a full-scale sine at the converter input (2Vrms, +4dBu)",
           1.228, "V rms", _positive("a voltage > 0 V rms"), "Chain.full_scale_vrms"),
        _o("dither", "converter", "choice:tpdf,none", "converter dither: tpdf or none", "tpdf", field="Chain.dither"),
        _o("stage", "converter", "choice:analog,digital",
           "filter ahead of the converter (analog) or after it (digital)", "analog", field="Chain.stage"),
        _o("anti_alias", "converter", "choice:none,ideal",
           "what the converter does with content above fs/2, noise and harmonics alike: none (it folds; on the "
           "analog stage the candidate is the only anti-alias filter, and it or --amp-bandwidth must bound the "
           "noise) or ideal (a brick-wall at fs/2 ahead of the converter: nothing folds)",
           "none", field="Chain.anti_alias"),
        _o("response", "grid", "choice:lowpass,highpass,bandpass", "lowpass, highpass or bandpass",
           "lowpass", field="Grid.response"),
        _o("family", "grid", "families", "filter families, comma list: butterworth,bessel,chebyshev1,elliptic",
           ("butterworth",), field="Grid.families"),
        _o("order", "grid", "orders", f"prototype orders, comma list ({MIN_ORDER} to {MAX_ORDER})",
           (4,), field="Grid.orders"),
        _o("cutoffs", "grid", "grid", "lowpass/highpass edges, Hz: START:STOP:COUNT (log-spaced) or a list",
           field="Grid.cutoffs_hz", default_text=f"{DEFAULT_EDGE_COUNTS['cutoffs']} edges fitted to the sample rate"),
        _o("low_edges", "grid", "grid", "bandpass low edges, Hz: START:STOP:COUNT or a list",
           field="Grid.low_edges_hz", default_text=f"{DEFAULT_EDGE_COUNTS['low_edges']} edges fitted to the sample rate"),
        _o("high_edges", "grid", "grid", "bandpass high edges, Hz: START:STOP:COUNT or a list",
           field="Grid.high_edges_hz", default_text=f"{DEFAULT_EDGE_COUNTS['high_edges']} edges fitted to the sample rate"),
        _o("ripple", "grid", "db", "passband ripple for chebyshev1/elliptic, dB (0 < r < 3)",
           0.1, "dB", Limit("0 < ripple < 3 dB", 0.0, 3.0, low_open=True, high_open=True), "Grid.ripple_db"),
        _o("stopband", "grid", "db", "elliptic stopband attenuation, dB",
           60.0, "dB", Limit("0 < stopband <= 200 dB", 0.0, 200.0, low_open=True), "Grid.stopband_db"),
        _o("program", "program", "choice:music,speech,data,audio",
           "what the recording is: music (judged by audibility at --playback-spl), speech (judged by the Speech "
           "Intelligibility Index) or data (a polar NRZ bit stream, scored by eye opening and bit-error rate); "
           "audio = music", "music", field="Program.kind"),
        _o("bit_rate", "program", "bit_rate",
           "bit rate of a data program, bit/s (2k, 9600) or auto (recovered from the recording)",
           field="Program.bit_rate_hz"),
        _o("meter", "meter", "choice:full,aes17", "meter band: full (0 to fs/2) or aes17 (20 Hz to 20 kHz)",
           "full", field="Meter.mode"),
        _o("tone", "meter", "frequency", "THD+N test tone, Hz", 997.0, "Hz", field="Meter.tone_hz"),
        _o("tone_level", "meter", "level_dbfs", "THD+N test tone level, dBFS",
           -1.0, "dBFS", Limit("a level <= 0 dBFS", high=0.0), "Meter.tone_level_dbfs"),
        _o("source_level", "source", "voltage",
           "the program's rms at the source, ahead of the gain (-50dBu, 2mVrms, -60dBV); then --gain scales "
           "program and source noise together", limit=_positive("a level > 0 V rms, e.g. -50dBu")),
        _o("spl", "source", "db_any",
           "microphone: the program's sound pressure level, dB SPL re 20 µPa (with --mic-sensitivity)"),
        _o("mic_sensitivity", "source", "mic_sensitivity",
           "microphone sensitivity, 10mV/Pa or -40dBV/Pa (with --spl)"),
        _o("rank", "grid", "choice:enbw,bandwidth",
           "what the choice minimises among passing cases: enbw (the bandwidth noise grows with) or "
           "bandwidth (−3 dB)", "enbw", field="Grid.rank"),
        _o("tie", "grid", "fraction",
           "cases within this share of the best rank figure tie, and go to the lower order, then the gentler "
           "family", 0.01, "%", field="Grid.tie"),
        _o("playback_spl", "listening", "db_any",
           "playback level: the program's rms is heard at this level, dB SPL",
           limit=Limit("0 < level <= 130 dB SPL", 0.0, 130.0, low_open=True), field="Listening.playback_spl_db",
           default_text="speech 62.35, ANSI S3.5-1997 normal vocal effort; music 80"),
        _o("hearing_threshold", "listening", "audiogram",
           "hearing threshold, dB HL at audiometric frequencies, e.g. 500:10,1000:20,4000:45",
           field="Listening.audiogram_hl", default_text="0 dB HL, ISO 389-7 reference"),
    )
}
# fmt: on
#: targets whose limit has a floor of its own (the others take any number their parser reads)
_TARGET_LIMITS = {
    "min_alias_rejection": _nonneg("an attenuation of 0 dB or more"),
    "max_flatness": _nonneg("a peak-to-peak gain of 0 dB or more"),
}
OPTIONS.update(  # the targets, from the one table of metrics
    (key, _o(key, section, kind, text, limit=_TARGET_LIMITS.get(key), field=f"Targets.{name}"))
    for key, (section, kind, text, name) in target_options().items()
)


#: The option groups (CLI help sections and TOML sections' keys), in --help order.
CHAIN_KEYS = (
    "source_ohms",
    "temperature",
    "input_level",
    "gain",
    "en",
    "in",
    "h2",
    "h3",
    "amp_bandwidth",
    "bits",
    "full_scale",
    "dither",
    "stage",
    "anti_alias",
    "source_level",
    "spl",
    "mic_sensitivity",
    "en_corner",
    "en_table",
    "in_corner",
)
GRID_KEYS = ("response", "family", "order", "cutoffs", "low_edges", "high_edges", "ripple", "stopband", "rank", "tie")
PROGRAM_KEYS = ("program", "bit_rate", "playback_spl", "hearing_threshold")
METER_KEYS = ("meter", "tone", "tone_level")


def model_fields(model: str) -> dict[str, Option]:
    """The options that fill fields of ``model`` (``"Chain"``), keyed by the field's name."""
    return {o.field.split(".", 1)[1]: o for o in OPTIONS.values() if o.field and o.field.split(".", 1)[0] == model}


def option_name(key: str) -> str:
    """The command-line spelling of a key: ``source_ohms`` -> ``--source-ohms``."""
    return "--" + key.replace("_", "-")


def grid_option(response: str, edge: str) -> str:
    """The option that sets the grid of a response's ``edge`` ('low' or 'high'):
    ``--cutoffs`` for a lowpass or highpass, ``--low-edges``/``--high-edges`` for a bandpass."""
    if response != "bandpass":
        return "--cutoffs"
    return "--low-edges" if edge == "low" else "--high-edges"

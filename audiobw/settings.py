"""Options, defaults and the TOML chain file: one table, one parser.

Every option of the chain, the grid, the targets and the meter is declared
once in :data:`OPTIONS`.  The CLI and the TOML loader both hand raw values to
:func:`build`, which parses them with :mod:`audiobw.units` and returns the
typed objects.  Command-line values override the file's.

TOML layout (same names as the options, in snake_case)::

    [source]      source_ohms, temperature, input_level
    [amplifier]   gain, en, in, en_corner, en_table, in_corner, h2, h3, amp_bandwidth
    [converter]   bits, full_scale, dither, stage, anti_alias
    [grid]        response, family, order, cutoffs, low_edges, high_edges, ripple, stopband
    [targets]     min_snr, min_snr_a, max_thdn, max_loss, max_lsd, min_ser, max_ber, min_eye,
                  min_headroom, max_nmr, max_audible_frames, min_sii, min_alias_rejection,
                  max_flatness, max_delay_spread
    [meter]       meter, tone, tone_level

Numbers are taken in the option's base unit (Ω, K, dB, V/√Hz, A/√Hz, V rms,
Hz); strings may carry units and prefixes exactly as on the command line.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from . import units
from .chain import Chain
from .errors import ConfigError, ParameterError
from .metrics import Meter
from .registry import FIDELITY_TARGETS, TARGET_OPTION
from .options import (
    FAMILIES,
    FAMILY_ALIASES,
    GRID_KEYS,
    MAX_ORDER,
    MIN_ORDER,
    OPTIONS,
    RESPONSE_ALIASES,
    option_name,
)

MAX_TOML_BYTES = 1_000_000  # a chain file is a few hundred bytes; more is a mistake or hostile


@dataclass
class Raw:
    """A raw value and where it came from (for error messages)."""

    value: object
    origin: str


def load_toml(path) -> dict[str, Raw]:
    """Read a chain/grid TOML file into raw values; unknown keys are refused.

    Raises
    ------
    ConfigError
        Unreadable file, invalid TOML, an unknown section or key, or a value
        of the wrong TOML type.
    """
    import tomllib

    p = Path(path)
    try:
        if p.is_file() and p.stat().st_size > MAX_TOML_BYTES:
            raise ConfigError(
                f"--chain: {str(p)!r}: {p.stat().st_size} bytes is too large for a chain file; "
                f"accepted: at most {MAX_TOML_BYTES} bytes"
            )
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except RecursionError:  # tables or arrays nested thousands deep
        raise ConfigError(
            f"--chain: {str(p)!r}: nested too deeply; accepted: the flat [section] key = value layout"
        ) from None
    except FileNotFoundError:
        raise ConfigError(f"--chain: {str(p)!r}: no such file") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"--chain: {str(p)!r}: cannot read ({exc})") from None
    except (tomllib.TOMLDecodeError, ValueError) as exc:  # ValueError: e.g. an integer too long to convert
        raise ConfigError(f"--chain: {str(p)!r}: not valid TOML ({str(exc).splitlines()[0][:160]})") from None
    sections = sorted({s for s, _, _ in OPTIONS.values()})
    out: dict[str, Raw] = {}
    for section, table in data.items():
        if section not in sections:
            raise ConfigError(f"{p}: unknown section [{section}]; accepted: {', '.join(f'[{s}]' for s in sections)}")
        if not isinstance(table, dict):
            raise ConfigError(f"{p}: {section!r} must be a table [{section}]")
        allowed = [k for k, (s, _, _) in OPTIONS.items() if s == section]
        for key, value in table.items():
            if key not in allowed:
                raise ConfigError(f"{p}: unknown key {key!r} in [{section}]; accepted: {', '.join(allowed)}")
            if isinstance(value, dict) or (isinstance(value, list) and any(isinstance(v, (dict, list)) for v in value)):
                raise ConfigError(f"{p}: [{section}] {key} must be a number, a string or a flat list")
            if isinstance(value, bool):
                raise ConfigError(f"{p}: [{section}] {key} = {value!r} is a boolean; accepted: a number or a string")
            if key == "en_table" and isinstance(value, str) and value.strip():
                value = str(p.parent / value)  # a path relative to the TOML file (an absolute one stays)
            out[key] = Raw(value, f"{p} [{section}] {key}")
    return out


def merge(file_values: dict[str, Raw], cli_values: dict[str, object]) -> dict[str, Raw]:
    """File values overridden by every command-line value that was given."""
    merged = dict(file_values)
    for key, value in cli_values.items():
        if value is not None and key in OPTIONS:
            merged[key] = Raw(value, option_name(key))
    return merged


def _parse(key: str, raw: Raw):
    _, kind, _ = OPTIONS[key]
    v, name = raw.value, raw.origin
    if kind.startswith("choice:"):
        choices = kind.split(":", 1)[1].split(",")
        aliases = RESPONSE_ALIASES if key == "response" else {}
        text = str(v).strip().lower()
        text = aliases.get(text, text)
        if text not in choices:
            raise ParameterError(f"{name}: {v!r} is not accepted; accepted: {', '.join(choices)}")
        return text
    if kind == "families":
        return tuple(units.parse_name_list(v, name=name, choices=FAMILIES, aliases=FAMILY_ALIASES))
    if kind == "orders":
        return tuple(units.parse_int_list(v, name=name, low=MIN_ORDER, high=MAX_ORDER))
    if kind == "grid":
        return tuple(units.parse_grid(v, name=name))
    if kind == "db_any":
        return units.parse_quantity(v, "gain_db", name=name)
    if kind == "input_level":
        return _parse_input_level(v, name)
    if kind == "bit_rate":
        return _parse_bit_rate(v, name)
    if kind == "mic_sensitivity":
        return _parse_mic_sensitivity(v, name)
    if kind == "probability":
        return _parse_probability(v, name)
    if kind == "percent":
        return _parse_percent(v, name)
    if kind == "en_table":
        from .entable import ACCEPTED, read_table

        if not isinstance(v, str) or not v.strip():
            raise ParameterError(f"{name}: {v!r} is not a file name; {ACCEPTED}")
        return (Path(v).name, read_table(v, origin=name))
    if kind == "audiogram":
        from .perceptual.threshold import parse_audiogram

        try:
            return parse_audiogram(v)
        except ValueError as exc:
            raise ParameterError(f"{name}: {exc}") from None
    return units.parse_quantity(v, kind, name=name)


def _parse_percent(v, name):
    text = str(v).strip().rstrip("%").strip()
    try:
        x = float(text)
    except ValueError:
        x = math.nan
    if not 0 <= x <= 100:
        raise ParameterError(f"{name}: {v!r} is not accepted; accepted: a share of frames, 0 to 100 (%)")
    return x


#: targets that judge fidelity (with none of them, music defaults to no audible error)
DEFAULT_MAX_AUDIBLE_FRAMES_PCT = 1.0
DEFAULT_MIN_SII = 0.75


def _parse_bit_rate(v, name):
    """'auto' or a rate in bit/s (SI prefixes; 'bit/s', 'bps' or 'Hz' accepted)."""
    text = str(v).strip()
    if text.lower() == "auto":
        return "auto"
    for suffix in ("bit/s", "bits/s", "b/s", "bps", "baud", "Bd"):
        if text.endswith(suffix):
            text = text[: -len(suffix)].strip() + "Hz"
            break
    try:
        return units.parse_quantity(text if not isinstance(v, (int, float)) else v, "frequency", name=name)
    except ParameterError:
        raise ParameterError(
            f"{name}: {v!r} is not a bit rate; accepted: a rate such as 2k, 9600bit/s, "
            "1.2kbps (0.001 to 1e+09 bit/s), or auto"
        ) from None


def _parse_probability(v, name):
    try:
        p = float(str(v).strip())
    except ValueError:
        p = math.nan
    if not (0 < p <= 0.5):
        raise ParameterError(f"{name}: {v!r} is not a bit-error rate; accepted: a number 0 < BER <= 0.5, e.g. 1e-9")
    return p


#: reference sound pressure of dB SPL, Pa (ISO 1683)
P_REF_PA = 20e-6


def _parse_mic_sensitivity(v, name):
    """Microphone sensitivity in V/Pa from '10mV/Pa', '-40dBV/Pa' (or a bare V/Pa number)."""
    text = str(v).strip()
    if text.endswith("/Pa"):
        text = text[:-3].strip()
    try:
        s = units.parse_quantity(text if not isinstance(v, (int, float)) else v, "voltage", name=name)
    except ParameterError:
        raise ParameterError(f"{name}: {v!r} is not a microphone sensitivity; accepted: 10mV/Pa or -40dBV/Pa") from None
    if not s > 0:
        raise ParameterError(f"{name}: {v!r} is out of range; accepted: a sensitivity > 0 V/Pa")
    return s


def _parse_input_level(v, name):
    """('gain', dB) or ('dbfs', level) or ('vrms', volts)."""
    text = str(v).strip()
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return ("gain", units.parse_quantity(v, "gain_db", name=name))
    if text.endswith("dBFS"):
        return ("dbfs", units.parse_quantity(text, "level_dbfs", name=name))
    if text.endswith("dB"):
        return ("gain", units.parse_quantity(text, "gain_db", name=name))
    try:
        return ("vrms", units.parse_quantity(text, "voltage", name=name))
    except ParameterError as exc:
        if "physical range" in str(exc):
            raise
        raise ParameterError(
            f"{name}: {v!r} is not an input level; accepted: a level such as -18dBFS, +4dBu, 0.5Vrms, "
            "or a gain such as 6dB"
        ) from None


@dataclass
class Settings:
    """Everything a sweep needs besides the input: typed and validated."""

    chain: Chain
    grid_values: dict
    meter: Meter
    targets: dict
    input_level: tuple | None
    program: str = "music"
    bit_rate: object = None
    #: the program's rms at the source, V (from --source-level, or --spl with --mic-sensitivity)
    source_vrms: float | None = None
    listening: object = None  # perceptual.scoring.Listening (music, speech)
    default_targets: tuple = ()  # target keys filled in by program-kind defaults

    def grid_for(self, nyquist_hz: float):
        """The Grid, with defaults for the edges that were not given, fitted to ``nyquist_hz``."""
        from .sweep import Grid

        g = dict(self.grid_values)
        response = g.get("response", "lowpass")
        top = min(20000.0, 0.95 * nyquist_hz)
        if response in ("lowpass", "highpass") and not g.get("cutoffs"):
            lo, hi = (min(2000.0, top / 4), top) if response == "lowpass" else (10.0, min(500.0, top / 4))
            g["cutoffs"] = tuple(units.parse_grid(f"{lo}:{hi}:24", name="default --cutoffs"))
        if response == "bandpass":
            if not g.get("low_edges"):
                g["low_edges"] = tuple(units.parse_grid(f"10:{min(400.0, top / 8)}:8", name="default --low-edges"))
            if not g.get("high_edges"):
                g["high_edges"] = tuple(
                    units.parse_grid(f"{min(2000.0, top / 4)}:{top}:12", name="default --high-edges")
                )
        return Grid(
            response=response,
            families=g.get("family", ("butterworth",)),
            orders=g.get("order", (4,)),
            cutoffs_hz=g.get("cutoffs", ()),
            low_edges_hz=g.get("low_edges", ()),
            high_edges_hz=g.get("high_edges", ()),
            ripple_db=g.get("ripple", 0.1),
            stopband_db=g.get("stopband", 60.0),
            rank=g.get("rank", "enbw"),
            tie=g.get("tie", 0.01),
        )

    def chain_for(self, analysis) -> Chain:
        """The chain with ``--input-level`` or the source level resolved against the program's measured rms.

        With a source level the program's rms at the converter is source_vrms·G, so
        the gain raises program and source noise together.
        """
        if self.source_vrms is not None:
            program_v = self.chain.full_scale_vrms * 10 ** (analysis.rms_dbfs / 20)
            from dataclasses import replace

            gain = 20 * math.log10(self.source_vrms * self.chain.gain / program_v)
            return replace(self.chain, input_gain_db=gain)
        if self.input_level is None:
            return self.chain
        kind, value = self.input_level
        if kind == "gain":
            gain = value
        else:
            rms_dbfs = analysis.rms_dbfs
            if kind == "dbfs":
                gain = value - rms_dbfs
            else:
                program_v = self.chain.full_scale_vrms * 10 ** (rms_dbfs / 20)
                gain = 20 * math.log10(value / program_v)
        from dataclasses import replace

        return replace(self.chain, input_gain_db=gain)


def build(raw: dict[str, Raw]) -> Settings:
    """Parse every raw value and build the typed settings."""
    parsed = {key: _parse(key, r) for key, r in raw.items()}
    chain_kw = {}
    mapping = {
        "source_ohms": "source_ohms",
        "temperature": "temperature_k",
        "gain": "gain_db",
        "en": "en_v_rthz",
        "in": "in_a_rthz",
        "h2": "h2_db",
        "h3": "h3_db",
        "amp_bandwidth": "amp_bandwidth_hz",
        "bits": "bits",
        "full_scale": "full_scale_vrms",
        "dither": "dither",
        "stage": "stage",
        "anti_alias": "anti_alias",
        "en_corner": "en_corner_hz",
        "in_corner": "in_corner_hz",
    }
    for key, field_name in mapping.items():
        if key in parsed:
            chain_kw[field_name] = int(parsed[key]) if key == "bits" else parsed[key]
    if "en_table" in parsed:
        for other in ("en", "en_corner"):
            if other in parsed:
                raise ParameterError(
                    f"{raw['en_table'].origin}: conflicts with {raw[other].origin} (the table gives "
                    "e_n at every frequency: its top row is the white level, its low rows the 1/f "
                    "part); accepted: the table or --en/--en-corner, not both"
                )
        chain_kw["en_table_file"], chain_kw["en_table"] = parsed["en_table"]
    for key in ("h2", "h3"):
        if key in parsed and parsed[key] >= 0:
            raise ParameterError(
                f"{raw[key].origin}: {raw[key].value!r} is not below 0 dB; "
                "accepted: a harmonic level in dB re the fundamental, e.g. -110"
            )
    try:
        chain = Chain(**chain_kw)
    except ParameterError as exc:
        # name the origin (file key) when the value came from the file
        msg = str(exc)
        for key, r in raw.items():
            if msg.startswith(option_name(key) + ":") and r.origin != option_name(key):
                msg = r.origin + msg[len(option_name(key)) :]
        raise ParameterError(msg) from None
    meter = Meter(
        mode=parsed.get("meter", "full"),
        tone_hz=parsed.get("tone", 997.0),
        tone_level_dbfs=parsed.get("tone_level", -1.0),
    )
    if meter.tone_level_dbfs > 0:
        raise ParameterError(
            f"{raw['tone_level'].origin}: {raw['tone_level'].value!r} is above full scale; accepted: a level <= 0 dBFS"
        )
    targets = {TARGET_OPTION[k]: parsed[k] for k in TARGET_OPTION if k in parsed}
    if "ripple" in parsed and not 0 < parsed["ripple"] < 3:
        raise ParameterError(
            f"{raw['ripple'].origin}: {raw['ripple'].value!r} is out of range; accepted: 0 < ripple < 3 dB"
        )
    if "stopband" in parsed and not 0 < parsed["stopband"] <= 200:
        raise ParameterError(
            f"{raw['stopband'].origin}: {raw['stopband'].value!r} is out of range; accepted: 0 < stopband <= 200 dB"
        )
    for key, what in (("min_alias_rejection", "an attenuation"), ("max_flatness", "a peak-to-peak gain")):
        if key in parsed and not parsed[key] >= 0:
            raise ParameterError(f"{raw[key].origin}: {raw[key].value!r} is negative; accepted: {what} of 0 dB or more")
    if "min_alias_rejection" in parsed and chain.stage == "digital":
        raise ParameterError(
            f"{raw['min_alias_rejection'].origin}: applies to the analog stage only (a digital "
            "filter acts after the converter, once the images have folded); accepted: "
            "--stage analog, or leave the target out"
        )
    grid_values = {k: parsed[k] for k in GRID_KEYS if k in parsed}
    program = parsed.get("program", "music")
    if program == "audio":
        program = "music"
    listening, default_targets = program_defaults(
        program, targets, parsed.get("playback_spl"), parsed.get("hearing_threshold")
    )
    if listening is None and ("min_sii" in targets or "max_nmr_db" in targets or "max_audible_frames_pct" in targets):
        raise ParameterError(
            "--max-nmr/--max-audible-frames/--min-sii: apply to music or speech programs; "
            "accepted: --program music or --program speech"
        )
    if "min_sii" in targets and program != "speech":
        raise ParameterError(
            f"{raw['min_sii'].origin}: applies to speech programs only; accepted: add --program speech"
        )
    if "playback_spl" in parsed and not 0 < parsed["playback_spl"] <= 130:
        raise ParameterError(
            f"{raw['playback_spl'].origin}: {raw['playback_spl'].value!r} is out of range; "
            "accepted: 0 < level <= 130 dB SPL"
        )
    bit_rate = parsed.get("bit_rate")
    data_targets = [k for k in ("max_ber", "min_eye") if k in parsed]
    if program == "data" and bit_rate is None:
        raise ParameterError("--bit-rate: a data program needs a bit rate; accepted: a rate such as 2k, or auto")
    if program != "data" and (data_targets or bit_rate is not None):
        given = raw[data_targets[0]].origin if data_targets else raw["bit_rate"].origin
        raise ParameterError(f"{given}: applies to data programs only; accepted: add --program data")
    source_vrms = _source_vrms(parsed, raw)
    return Settings(
        chain=chain,
        grid_values=grid_values,
        meter=meter,
        targets=targets,
        input_level=parsed.get("input_level"),
        program=program,
        bit_rate=bit_rate,
        source_vrms=source_vrms,
        listening=listening,
        default_targets=tuple(default_targets),
    )


def program_defaults(program: str, targets: dict, playback_spl=None, audiogram=None):
    """The listening conditions of a music or speech program, and the default targets it adds to ``targets``.

    Music with no fidelity target gets "no audible error" (max_audible_frames_pct);
    speech gets min_sii unless given.  Returns (listening or None, added target keys).
    """
    if program not in ("music", "speech"):
        return None, []
    from .perceptual.scoring import Listening

    added = []
    if program == "music" and not any(k in targets for k in FIDELITY_TARGETS):
        targets["max_audible_frames_pct"] = DEFAULT_MAX_AUDIBLE_FRAMES_PCT
        added.append("max_audible_frames_pct")
    if program == "speech" and "min_sii" not in targets:
        targets["min_sii"] = DEFAULT_MIN_SII
        added.append("min_sii")
    return Listening(program, playback_spl, audiogram), added


def sanity_warnings(settings: Settings, raw_keys=()) -> list[str]:
    """One line per value that is legal but almost surely a slip (a missing SI prefix and the like)."""
    from .chain import BOLTZMANN, vrms_to_dbu

    c, out = settings.chain, []
    if c.en_v_rthz > 1e-6:
        v = c.gain * c.en_v_rthz * math.sqrt(20000.0)
        out.append(
            f"{'--en-table (its top row)' if c.en_table is not None else '--en'} {c.en_v_rthz:g} V/√Hz is {c.en_v_rthz * 1e9:.3g} nV/√Hz ({v:.3g} V rms at the converter "
            "over 20 kHz); amplifiers are 0.5 to 50 nV/√Hz: was a prefix left off?"
        )
    if c.in_a_rthz > 1e-9:
        out.append(
            f"--in {c.in_a_rthz:g} A/√Hz is {c.in_a_rthz * 1e12:.3g} pA/√Hz; amplifiers are 0.01 to "
            "10 pA/√Hz: was a prefix left off (1.5p)?"
        )
    if settings.source_vrms is not None:
        at_converter = settings.source_vrms * c.gain
        if at_converter > c.full_scale_vrms:
            out.append(
                f"the source level ({vrms_to_dbu(settings.source_vrms):.1f} dBu) times the gain "
                f"({c.gain_db:g} dB) is {vrms_to_dbu(at_converter):.1f} dBu rms at the converter, above its "
                f"full scale ({vrms_to_dbu(c.full_scale_vrms):.1f} dBu): the converter clips; lower --gain"
            )
    thermal = math.sqrt(4 * BOLTZMANN * c.temperature_k * c.source_ohms) if c.source_ohms > 0 else 0.0
    if c.source_ohms > 10e6:
        out.append(f"--source-ohms {c.source_ohms:g} Ω: its thermal noise alone is {thermal * 1e9:.3g} nV/√Hz")
    return out


def default_chain_text(c) -> str:
    """The chain in one line, for when the user gave none."""
    return (
        f"Rs {c.source_ohms:g} Ω at {c.temperature_k:g} K, gain {c.gain_db:g} dB, e_n {c.en_v_rthz * 1e9:g} nV/√Hz, "
        f"i_n {c.in_a_rthz * 1e12:g} pA/√Hz, {c.bits} bits, full scale {c.full_scale_vrms:g} V rms, "
        f"dither {c.dither}, {c.stage} filter stage, anti-alias {c.anti_alias}, the program taken as it is at "
        "the converter"
    )


def _source_vrms(parsed: dict, raw: dict) -> float | None:
    """The program's rms at the source from --source-level or --spl × --mic-sensitivity; refuses mixtures."""
    has_spl, has_sens = "spl" in parsed, "mic_sensitivity" in parsed
    if has_spl != has_sens:
        given = raw["spl" if has_spl else "mic_sensitivity"].origin
        raise ParameterError(
            f"{given}: needs {'--mic-sensitivity' if has_spl else '--spl'} as well; accepted: "
            "--spl 94 --mic-sensitivity 10mV/Pa"
        )
    if "source_level" in parsed and has_spl:
        raise ParameterError(
            f"{raw['source_level'].origin}: give the source level or --spl with --mic-sensitivity, not both"
        )
    if "source_level" in parsed:
        v = parsed["source_level"]
        if not v > 0:
            raise ParameterError(
                f"{raw['source_level'].origin}: {raw['source_level'].value!r} is out of range; "
                "accepted: a level > 0 V rms, e.g. -50dBu"
            )
        given = raw["source_level"].origin
    elif has_spl:
        v = parsed["mic_sensitivity"] * P_REF_PA * 10 ** (parsed["spl"] / 20)
        given = raw["spl"].origin
    else:
        return None
    if "input_level" in parsed:
        raise ParameterError(
            f"{raw['input_level'].origin}: states the level at the converter, {given} the level "
            "at the source; give one of them"
        )
    return v

"""The TOML chain file, and the typed settings built from raw values.

Every option of the chain, the grid, the targets, the meter, the program and
the listening is declared once in :data:`audiobw.options.OPTIONS`.  The CLI and
the TOML loader both hand raw values, each with its origin (:class:`Raw`), to
:func:`build`, which parses them (:mod:`audiobw.values`), checks them against
the options' limits naming the origin, and returns the typed
:class:`audiobw.model.Settings`.  Command-line values override the file's.

TOML layout (same names as the options, in snake_case; the sections of ``OPTIONS``)::

    [source]      source_ohms, temperature, input_level, source_level, spl, mic_sensitivity
    [amplifier]   gain, en, in, h2, h3, en_corner, en_table, in_corner, amp_bandwidth
    [converter]   bits, full_scale, dither, stage, anti_alias
    [grid]        response, family, order, cutoffs, low_edges, high_edges, ripple, stopband, rank, tie
    [program]     program, bit_rate
    [meter]       meter, tone, tone_level
    [listening]   playback_spl, hearing_threshold
    [targets]     min_snr, min_snr_a, max_thdn, max_loss, max_lsd, min_ser, max_ber, min_eye,
                  min_headroom, max_nmr, max_audible_frames, min_sii, min_alias_rejection,
                  max_flatness, max_delay_spread

Numbers are taken in the option's base unit (Ω, K, dB, V/√Hz, A/√Hz, V rms,
Hz); strings may carry units and prefixes exactly as on the command line.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from .chain import CHAIN_FIELDS, Chain
from .errors import ConfigError, ParameterError
from .metrics import Meter
from .model import Settings
from .options import GRID_KEYS, OPTIONS, default, model_fields, option_name
from .registry import FIDELITY_TARGETS, TARGET_OPTION
from .values import P_REF_PA, parse

__all__ = ["Raw", "Settings", "build", "load_toml", "merge", "program_defaults", "sanity_warnings"]

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
    sections = sorted({o.section for o in OPTIONS.values()})
    out: dict[str, Raw] = {}
    for section, table in data.items():
        if section not in sections:
            raise ConfigError(f"{p}: unknown section [{section}]; accepted: {', '.join(f'[{s}]' for s in sections)}")
        if not isinstance(table, dict):
            raise ConfigError(f"{p}: {section!r} must be a table [{section}]")
        allowed = [k for k, o in OPTIONS.items() if o.section == section]
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


#: targets that judge fidelity (with none of them, music defaults to no audible error)
DEFAULT_MAX_AUDIBLE_FRAMES_PCT = 1.0
DEFAULT_MIN_SII = 0.75


def build(raw: dict[str, Raw]) -> Settings:
    """Parse every raw value, check it against its option's limits, and build the typed settings.

    A refusal names where the value came from (``raw[key].origin``: the option, or
    the file and its ``[section] key``) and shows the value as it was given.
    """
    parsed = {key: parse(key, r.value, r.origin) for key, r in raw.items()}
    for key, option in OPTIONS.items():
        if key in parsed:
            option.check(parsed[key], raw[key].origin, raw[key].value)
    if "en_table" in parsed:
        for other in ("en", "en_corner"):
            if other in parsed:
                raise ParameterError(
                    f"{raw['en_table'].origin}: conflicts with {raw[other].origin} (the table gives "
                    "e_n at every frequency: its top row is the white level, its low rows the 1/f "
                    "part); accepted: the table or --en/--en-corner, not both"
                )
    chain_kw = {name: parsed[o.key] for name, o in CHAIN_FIELDS.items() if o.key in parsed}
    if "bits" in chain_kw:
        chain_kw["bits"] = int(chain_kw["bits"])
    if "en_table" in parsed:
        chain_kw["en_table_file"], chain_kw["en_table"] = parsed["en_table"]
    chain = Chain(**chain_kw)  # every value is checked above: Chain's own checks pass
    meter = Meter(**{name: parsed[o.key] for name, o in model_fields("Meter").items() if o.key in parsed})
    targets = {TARGET_OPTION[k]: parsed[k] for k in TARGET_OPTION if k in parsed}
    if "min_alias_rejection" in parsed and chain.stage == "digital":
        raise ParameterError(
            f"{raw['min_alias_rejection'].origin}: applies to the analog stage only (a digital "
            "filter acts after the converter, once the images have folded); accepted: "
            "--stage analog, or leave the target out"
        )
    grid_values = {k: parsed[k] for k in GRID_KEYS if k in parsed}
    if "elliptic" in parsed.get("family", ()) and "stopband" in parsed:
        ripple = parsed.get("ripple", default("ripple"))
        if not parsed["stopband"] > ripple:  # the per-case check (filters.validate_spec) names only --stopband
            raise ParameterError(
                f"{raw['stopband'].origin}: {raw['stopband'].value!r} is out of range; accepted: an elliptic "
                f"stopband above the ripple ({ripple:g} dB), up to 200 dB"
            )
    program = parsed.get("program", default("program"))
    if program == "audio":
        program = "music"
    listening, default_targets = program_defaults(
        program, targets, parsed.get("playback_spl"), parsed.get("hearing_threshold")
    )
    heard = [raw[k].origin for k in ("max_nmr", "max_audible_frames", "min_sii") if k in raw]
    if listening is None and heard:
        raise ParameterError(
            f"{heard[0]}: applies to music or speech programs; accepted: --program music or --program speech"
        )
    if "min_sii" in targets and program != "speech":
        raise ParameterError(
            f"{raw['min_sii'].origin}: applies to speech programs only; accepted: add --program speech"
        )
    bit_rate = parsed.get("bit_rate")
    data_targets = [k for k in ("max_ber", "min_eye") if k in parsed]
    if program == "data" and bit_rate is None:
        given = raw["program"].origin if "program" in raw else "--program"
        raise ParameterError(
            f"{given}: a data program needs a bit rate (--bit-rate, or bit_rate in [program]); "
            "accepted: a rate such as 2k, or auto"
        )
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
        origins={key: r.origin for key, r in raw.items()},
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

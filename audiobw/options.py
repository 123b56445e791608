"""The public option table and name lists, free of heavy imports.

The CLI builds its options from :data:`OPTIONS` and the TOML loader accepts
exactly these keys, so the two cannot drift apart.  Importing this module
costs nothing beyond the standard library (``audiobw --help`` stays fast).
"""

from __future__ import annotations

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

#: key -> (TOML section, parser kind, help text).  The option is --key-with-dashes.
OPTIONS: dict[str, tuple[str, str, str]] = {
    "source_ohms": ("source", "resistance", "source resistance Rs, Ω (e.g. 150, 2.2k; 0 = ideal source)"),
    "temperature": ("source", "temperature", "source temperature, K or °C (e.g. 290, 27C)"),
    "input_level": (
        "source",
        "input_level",
        "rescale the program: its rms level at the converter input (-18dBFS, +4dBu, 0.5V) or a gain (6dB)",
    ),
    "gain": ("amplifier", "gain_db", "amplifier voltage gain, dB (e.g. 40)"),
    "en": ("amplifier", "voltage_density", "amplifier input voltage noise, V/√Hz (e.g. 1.2n)"),
    "in": ("amplifier", "current_density", "amplifier input current noise, A/√Hz (e.g. 1.5p)"),
    "h2": ("amplifier", "gain_db", "2nd harmonic at full scale, dB re fundamental (e.g. -110)"),
    "h3": ("amplifier", "gain_db", "3rd harmonic at full scale, dB re fundamental (e.g. -120)"),
    "en_corner": ("amplifier", "frequency", "1/f corner of e_n, Hz: e_n(f)² = e_n²·(1 + fc/f) (default: none, white)"),
    "en_table": (
        "amplifier",
        "en_table",
        "measured e_n density, a CSV file of rows 'frequency_Hz,e_n_V_per_rtHz' "
        "(one header line allowed; TOML: a path relative to the TOML file): interpolated in log-log, held "
        "flat beyond both ends; replaces --en and --en-corner (its top row is the white level)",
    ),
    "in_corner": ("amplifier", "frequency", "1/f corner of i_n, Hz: i_n(f)² = i_n²·(1 + fc/f) (default: none, white)"),
    "amp_bandwidth": ("amplifier", "frequency", "amplifier's own -3 dB bandwidth, Hz (one pole; default unlimited)"),
    "bits": ("converter", "bits", "converter resolution, bits (1 to 32)"),
    "full_scale": ("converter", "voltage", "rms of a full-scale sine at the converter input (2Vrms, +4dBu)"),
    "dither": ("converter", "choice:tpdf,none", "converter dither: tpdf or none"),
    "stage": ("converter", "choice:analog,digital", "filter ahead of the converter (analog) or after it (digital)"),
    "anti_alias": (
        "converter",
        "choice:none,ideal",
        "what the converter does with content above fs/2, noise and "
        "harmonics alike: none (default: it folds; on the analog stage the candidate is the only "
        "anti-alias filter, and it or --amp-bandwidth must bound the noise) or ideal (a brick-wall at "
        "fs/2 ahead of the converter: nothing folds)",
    ),
    "response": ("grid", "choice:lowpass,highpass,bandpass", "lowpass, highpass or bandpass"),
    "family": ("grid", "families", "filter families, comma list: butterworth,bessel,chebyshev1,elliptic"),
    "order": ("grid", "orders", f"prototype orders, comma list ({MIN_ORDER} to {MAX_ORDER})"),
    "cutoffs": ("grid", "grid", "lowpass/highpass edges, Hz: START:STOP:COUNT (log-spaced) or a list"),
    "low_edges": ("grid", "grid", "bandpass low edges, Hz: START:STOP:COUNT or a list"),
    "high_edges": ("grid", "grid", "bandpass high edges, Hz: START:STOP:COUNT or a list"),
    "ripple": ("grid", "db", "passband ripple for chebyshev1/elliptic, dB (0 < r < 3)"),
    "stopband": ("grid", "db", "elliptic stopband attenuation, dB"),
    "program": (
        "program",
        "choice:music,speech,data,audio",
        "what the recording is: music (default; "
        "judged by audibility at --playback-spl), speech (judged by the Speech Intelligibility Index) "
        "or data (a polar NRZ bit stream, scored by eye opening and bit-error rate); audio = music",
    ),
    "bit_rate": (
        "program",
        "bit_rate",
        "bit rate of a data program, bit/s (2k, 9600) or auto (recovered from the recording)",
    ),
    "meter": ("meter", "choice:full,aes17", "meter band: full (0 to fs/2) or aes17 (20 Hz to 20 kHz)"),
    "tone": ("meter", "frequency", "THD+N test tone, Hz (default 997)"),
    "tone_level": ("meter", "level_dbfs", "THD+N test tone level, dBFS (default -1)"),
    "source_level": (
        "source",
        "voltage",
        "the program's rms at the source, ahead of the gain (-50dBu, 2mVrms, "
        "-60dBV); then --gain scales program and source noise together",
    ),
    "spl": (
        "source",
        "db_any",
        "microphone: the program's sound pressure level, dB SPL re 20 µPa (with --mic-sensitivity)",
    ),
    "mic_sensitivity": ("source", "mic_sensitivity", "microphone sensitivity, 10mV/Pa or -40dBV/Pa (with --spl)"),
    "rank": (
        "grid",
        "choice:enbw,bandwidth",
        "what the choice minimises among passing cases: enbw (the "
        "bandwidth noise grows with; default) or bandwidth (−3 dB)",
    ),
    "tie": (
        "grid",
        "fraction",
        "cases within this share of the best rank figure tie, and go to the lower "
        "order, then the gentler family (default 1%)",
    ),
    "playback_spl": (
        "listening",
        "db_any",
        "playback level: the program's rms is heard at this level, "
        "dB SPL (default: speech 62.35, ANSI S3.5-1997 normal vocal effort; music 80)",
    ),
    "hearing_threshold": (
        "listening",
        "audiogram",
        "hearing threshold, dB HL at audiometric "
        "frequencies, e.g. 500:10,1000:20,4000:45 (default 0 dB HL, ISO 389-7 reference)",
    ),
}
OPTIONS.update(target_options())  # the targets, from the one table of metrics


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


def option_name(key: str) -> str:
    """The command-line spelling of a key: ``source_ohms`` -> ``--source-ohms``."""
    return "--" + key.replace("_", "-")


def grid_option(response: str, edge: str) -> str:
    """The option that sets the grid of a response's ``edge`` ('low' or 'high'):
    ``--cutoffs`` for a lowpass or highpass, ``--low-edges``/``--high-edges`` for a bandpass."""
    if response != "bandpass":
        return "--cutoffs"
    return "--low-edges" if edge == "low" else "--high-edges"

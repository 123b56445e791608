"""Check a sweep.json and its spectrum.npz before a report uses them.

A hand-edited or corrupt file is refused with one line naming the file, the
JSON pointer (RFC 6901) of the first bad value and what is accepted.  Three
layers: the JSON Schema ``docs/sweep.schema.json`` (validated with the
``jsonschema`` library, Draft 2020-12, when it and the schema file are
present), then rules a schema cannot say (every number finite, ``choice.case``
and ``choice.next_narrower`` name cases that exist, case ids unique, the
grid's design values, ``conflicts`` only without a choice and naming targets
that were set), then the spectrum's arrays (shapes, finite, rising
frequencies, the sample rate of sweep.json).

References
----------
.. [1] jsonschema documentation: ``Draft202012Validator``, ``best_match``,
   ``ValidationError.absolute_path``.
.. [2] RFC 6901, JavaScript Object Notation (JSON) Pointer.
.. [3] numpy documentation: ``numpy.load`` (``allow_pickle=False``).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from ..errors import AudioFileError

SCHEMA = Path(__file__).resolve().parents[2] / "docs" / "sweep.schema.json"
ACCEPTED = "accepted: a sweep.json as written by audiobw sweep (docs/sweep.schema.json)"


def pointer(parts) -> str:
    """The JSON pointer (RFC 6901) of a path of keys and indices."""
    return "/" + "/".join(str(p).replace("~", "~0").replace("/", "~1") for p in parts) if parts else "/"


def _short(value) -> str:
    text = json.dumps(value, ensure_ascii=True) if not isinstance(value, float) else repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _refuse(path, parts, what: str):
    raise AudioFileError(f"{path}: at {pointer(parts)}: {what}; {ACCEPTED}")


def loads(path, raw: bytes):
    """Parse sweep.json text; NaN, Infinity and duplicate keys are refused."""

    def no_constant(name):
        raise ValueError(f"non-finite number {name}")

    def no_duplicates(pairs):
        keys = [k for k, _ in pairs]
        dup = sorted({k for k in keys if keys.count(k) > 1})
        if dup:
            raise ValueError(f"duplicate key {dup[0]!r}")
        return dict(pairs)

    try:
        return json.loads(raw.decode("utf-8"), parse_constant=no_constant, object_pairs_hook=no_duplicates)
    except RecursionError:
        raise AudioFileError(f"{path}: nested too deep; {ACCEPTED}") from None
    except (UnicodeDecodeError, ValueError) as exc:
        raise AudioFileError(f"{path}: cannot read as JSON ({exc}); {ACCEPTED}") from None


def _schema_errors(doc):
    try:
        import jsonschema
        from jsonschema.exceptions import best_match
    except ImportError:  # the structural rules below still hold
        return None
    try:
        schema = json.loads(SCHEMA.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    validator = jsonschema.Draft202012Validator(schema)
    return best_match(validator.iter_errors(doc))


def _finite(value, parts, path):
    if isinstance(value, float) and not math.isfinite(value):
        _refuse(path, parts, f"{_short(value)} is not a finite number")
    if isinstance(value, dict):
        for k, v in value.items():
            _finite(v, parts + [k], path)
    elif isinstance(value, list):
        for i, v in enumerate(value):
            _finite(v, parts + [i], path)


def _number(doc, parts, path, *, positive=False, null=False):
    v = doc
    for p in parts:
        if isinstance(v, dict) and p in v or isinstance(v, list) and isinstance(p, int) and p < len(v):
            v = v[p]
        else:
            _refuse(path, parts, "missing")
    if v is None and null:
        return
    if isinstance(v, bool) or not isinstance(v, (int, float)) or (positive and not v > 0):
        _refuse(path, parts, f"{_short(v)} is not a {'positive ' if positive else ''}number")


def validate_sweep(doc, path) -> None:
    """Refuse ``doc`` (parsed sweep.json read from ``path``) unless a report can use it."""
    err = _schema_errors(doc)
    if err is not None:
        what = err.message if len(err.message) <= 160 else err.message[:157] + "..."
        _refuse(path, list(err.absolute_path), what)
    if not isinstance(doc, dict):
        _refuse(path, [], "not a JSON object")
    for key in ("tool", "input", "chain", "grid", "meter", "targets", "cases", "choice"):
        if key not in doc:
            _refuse(path, [key], "missing")
    _finite(doc, [], path)
    cases = doc["cases"]
    if not isinstance(cases, list) or not cases or not all(isinstance(c, dict) for c in cases):
        _refuse(path, ["cases"], "not a non-empty list of cases")
    ids = [c.get("id") for c in cases]
    for i, ident in enumerate(ids):
        if isinstance(ident, bool) or not isinstance(ident, int) or ident in ids[:i]:
            _refuse(path, ["cases", i, "id"], f"{_short(ident)} is not a unique integer case id")
    grid = doc["grid"]
    if not isinstance(grid, dict):
        _refuse(path, ["grid"], "not an object")
    if grid.get("response") not in ("lowpass", "highpass", "bandpass"):
        _refuse(path, ["grid", "response"], f"{_short(grid.get('response'))} is not lowpass, highpass or bandpass")
    _number(doc, ["grid", "ripple_db"], path, positive=True)
    _number(doc, ["grid", "stopband_db"], path, positive=True)
    for i, c in enumerate(cases):
        for key in ("design_low_hz", "design_high_hz"):
            _number(doc, ["cases", i, key], path, positive=True, null=True)
        if c.get("response") != grid["response"]:
            _refuse(path, ["cases", i, "response"], f"{_short(c.get('response'))} differs from /grid/response")
        for key, need in (
            ("low_hz", c.get("response") in ("highpass", "bandpass")),
            ("high_hz", c.get("response") in ("lowpass", "bandpass")),
        ):
            if need:
                _number(doc, ["cases", i, key], path, positive=True)
    choice = doc["choice"]
    if choice is not None:
        if not isinstance(choice, dict) or choice.get("case") not in ids:
            _refuse(
                path,
                ["choice", "case"],
                f"{_short(choice.get('case') if isinstance(choice, dict) else choice)} names no case in /cases",
            )
        nn = choice.get("next_narrower")
        if nn is not None and nn not in ids:
            _refuse(path, ["choice", "next_narrower"], f"{_short(nn)} names no case in /cases")
    fs = doc["input"].get("sample_rate_hz") if isinstance(doc["input"], dict) else None
    if isinstance(fs, bool) or not isinstance(fs, int) or fs <= 0:
        _refuse(path, ["input", "sample_rate_hz"], f"{_short(fs)} is not a positive integer")
    for key in ("occupied_low_hz", "occupied_high_hz", "duration_s"):
        _number(doc, ["input", key], path)
    lo, hi = doc["input"]["occupied_low_hz"], doc["input"]["occupied_high_hz"]
    if not 0 <= lo < hi <= fs / 2:
        _refuse(
            path,
            ["input", "occupied_high_hz"],
            f"occupied band {_short(lo)} to {_short(hi)} Hz is not inside 0 to fs/2 = {fs / 2:g} Hz with low < high",
        )
    chain = doc["chain"]
    for key, (low, high, null) in CHAIN_LIMITS.items():
        v = chain.get(key)
        if v is None and null:
            continue
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not low <= v <= high:
            _refuse(path, ["chain", key], f"{_short(v)} is outside the physical range {low:g} to {high:g}")
    _check_en_table(chain, path)
    for i, c in enumerate(cases):
        _number(doc, ["cases", i, "bandwidth_hz"], path, positive=True)
        if not isinstance(c.get("margins_db"), dict):
            _refuse(path, ["cases", i, "margins_db"], f"{_short(c.get('margins_db'))} is not an object of margins")
    for i, c in enumerate(doc.get("conflicts") or []):
        if choice is not None:
            _refuse(
                path, ["conflicts", i], "a conflict beside a choice (conflicts are listed only when no case passes)"
            )
        for j, key in enumerate(c.get("targets", [])):
            if key not in doc["targets"]:
                _refuse(path, ["conflicts", i, "targets", j], f"{_short(key)} is not a target of /targets")
    if choice is not None and choice.get("binding") is not None:
        # null where the margin is beyond the double range (a BER that underflows to 0)
        _number(doc, ["choice", "binding_margin_db"], path, null=True)
    meter = doc["meter"]
    if isinstance(meter, dict):
        if meter.get("mode") not in ("full", "aes17"):
            _refuse(path, ["meter", "mode"], f"{_short(meter.get('mode'))} is not full or aes17")
        _number(doc, ["meter", "tone_hz"], path, positive=True)
        _number(doc, ["meter", "tone_level_dbfs"], path)
        lo, hi = meter.get("low_hz"), meter.get("high_hz")
        if isinstance(lo, (int, float)) and isinstance(hi, (int, float)) and not 0 <= lo < hi <= fs / 2:
            _refuse(path, ["meter"], f"band {_short(lo)} to {_short(hi)} Hz is not inside 0 to fs/2 = {fs / 2:g} Hz")
    if "data" in doc and doc["data"] is not None and not isinstance(doc["data"], dict):
        _refuse(path, ["data"], "not an object")


#: Physical ranges of the chain's values that a report can compute with (common practice:
#: wide enough for any real front end; beyond them the noise formulas overflow).
CHAIN_LIMITS = {
    "source_ohms": (0.0, 1e12, False),
    "temperature_k": (1e-3, 1e4, False),
    "gain_db": (-300.0, 300.0, False),
    "en_v_rthz": (0.0, 1e-2, False),
    "in_a_rthz": (0.0, 1e-2, False),
    "full_scale_vrms": (1e-9, 1e5, False),
    "amp_bandwidth_hz": (1e-3, 1e10, True),
    "en_corner_hz": (1e-3, 1e9, True),
    "in_corner_hz": (1e-3, 1e9, True),
    "input_gain_db": (-300.0, 300.0, True),
    "h2_db": (-400.0, 0.0, True),
    "h3_db": (-400.0, 0.0, True),
}


def _check_en_table(chain: dict, path) -> None:
    """``chain.en_table``: null, or the rows --en-table accepts, its top row's e_n equal to ``en_v_rthz``."""
    from ..entable import check_rows
    from ..errors import ParameterError

    table, name = chain.get("en_table"), chain.get("en_table_file")
    if name is not None and (not isinstance(name, str) or table is None):
        _refuse(path, ["chain", "en_table_file"], f"{_short(name)} is not the file name of chain.en_table")
    if table is None:
        return
    if not isinstance(table, list):
        _refuse(path, ["chain", "en_table"], "not a list of [frequency_hz, e_n_v_rthz] rows")
    try:
        rows = check_rows(table, name="table")
    except ParameterError as exc:
        _refuse(path, ["chain", "en_table"], str(exc).split(";")[0])
    if rows[-1][1] != chain.get("en_v_rthz"):
        _refuse(
            path,
            ["chain", "en_v_rthz"],
            f"{_short(chain.get('en_v_rthz'))} is not the e_n of the table's top row ({rows[-1][1]!r})",
        )


NPZ_ACCEPTED = "accepted: the spectrum.npz written by the same audiobw sweep"


def load_spectrum(npz, doc) -> dict:
    """Read spectrum.npz (no pickles) and check its arrays against sweep.json ``doc``."""
    import zipfile

    try:
        with np.load(npz, allow_pickle=False) as z:
            spectrum = {k: z[k] for k in z.files}
    except (OSError, ValueError, EOFError, KeyError, zipfile.BadZipFile, RuntimeError) as exc:
        text = str(exc).splitlines()[0][:120] if str(exc) else type(exc).__name__
        raise AudioFileError(f"{npz}: cannot read ({text}); {NPZ_ACCEPTED}") from None
    need = {"freqs_hz", "psd", "weights_hz", "sample_rate_hz", "sha256"}
    if not need <= set(spectrum):
        raise AudioFileError(f"{npz}: missing arrays {sorted(need - set(spectrum))}; {NPZ_ACCEPTED}")
    sha = spectrum["sha256"]
    if sha.shape != () or sha.dtype.kind != "U":
        raise AudioFileError(f"{npz}: sha256 is not one string; {NPZ_ACCEPTED}")
    if str(sha) != doc["input"]["sha256"]:
        raise AudioFileError(
            f"{npz}: its program (sha256 {str(sha)[:12]}…) is not the one in sweep.json "
            f"({doc['input']['sha256'][:12]}…); accepted: the spectrum.npz written by the same sweep"
        )
    f, psd, w = spectrum["freqs_hz"], spectrum["psd"], spectrum["weights_hz"]

    def bad(what):
        raise AudioFileError(f"{npz}: {what}; {NPZ_ACCEPTED}")

    for name, a in (("freqs_hz", f), ("psd", psd), ("weights_hz", w)):
        if a.ndim != 1 or a.dtype.kind not in "fiu":
            bad(f"{name} has shape {a.shape} and dtype {a.dtype}; accepted: one row of numbers")
        if a.size < 2:
            bad(f"{name} has {a.size} bins; accepted: at least 2")
        if not np.all(np.isfinite(a)):
            bad(f"{name} holds NaN or infinite values")
    if not f.size == psd.size == w.size:
        bad(f"freqs_hz, psd and weights_hz have {f.size}, {psd.size} and {w.size} bins; accepted: equal")
    if np.any(np.diff(f) <= 0) or f[0] < 0:
        bad("freqs_hz does not rise from 0 Hz or above")
    if np.any(psd < 0) or np.any(w < 0):
        bad("psd or weights_hz holds negative values")
    sr = spectrum["sample_rate_hz"]
    if sr.shape != () or sr.dtype.kind not in "iu" or int(sr) != doc["input"]["sample_rate_hz"]:
        bad(f"sample_rate_hz {sr!r} is not sweep.json's {doc['input']['sample_rate_hz']} Hz")
    if f[-1] > int(sr) / 2 * (1 + 1e-9):
        bad(f"freqs_hz reaches {f[-1]:g} Hz, above fs/2 = {int(sr) / 2:g} Hz")
    if "band_frames" in spectrum:  # the masking plot's input (sweeps before it lack it: no plot)
        e, bf = spectrum.get("band_edges_hz"), spectrum["band_frames"]
        if (
            e is None
            or e.ndim != 1
            or e.size < 2
            or e.dtype.kind not in "fiu"
            or not np.all(np.isfinite(e))
            or np.any(np.diff(e) <= 0)
        ):
            bad("band_edges_hz is not a rising row of band edges")
        if bf.ndim != 2 or bf.dtype.kind not in "fiu" or bf.shape[1] != e.size - 1 or bf.shape[0] < 1:
            bad(f"band_frames has shape {bf.shape}; accepted: (frames, {e.size - 1}) numbers")
        if not np.all(np.isfinite(bf)) or np.any(bf < 0):
            bad("band_frames holds NaN, infinite or negative values")
    return spectrum

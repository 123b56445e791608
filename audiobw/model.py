"""The typed settings of a sweep (:class:`Settings`) and their plain JSON form.

:func:`audiobw.settings.build` makes them from the command line and the TOML
file, :meth:`audiobw.api.Study.settings` from the library's typed study; the
batch workers get them as :meth:`Settings.to_json` and read them back with
:meth:`Settings.from_json`.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, fields

from . import units
from .chain import Chain
from .metrics import Meter
from .options import DEFAULT_EDGE_COUNTS as EDGES
from .options import GRID_KEYS, OPTIONS, default

#: grid option key -> the Grid field it fills (``family`` -> ``families``)
FIELD_OF_GRID_KEY = {k: OPTIONS[k].field.split(".", 1)[1] for k in GRID_KEYS}  # type: ignore[union-attr]


def _plain(v):
    if isinstance(v, (tuple, list)):
        return [_plain(x) for x in v]
    if isinstance(v, dict):
        return {k: _plain(x) for k, x in v.items()}
    if hasattr(v, "__dataclass_fields__"):
        return _plain(asdict(v))
    return v


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
    #: option key -> where its value came from (``--cutoffs``, ``chain.toml [grid] cutoffs``), for the
    #: refusals that only the file can prompt (an edge above its Nyquist); not part of the JSON form
    origins: dict = field(default_factory=dict, compare=False)

    def grid_value(self, key: str):
        """The grid option ``key`` as given, or its default (:data:`audiobw.options.OPTIONS`)."""
        return self.grid_values.get(key, default(key))

    def grid_for(self, nyquist_hz: float):
        """The Grid, with defaults for the edges that were not given, fitted to ``nyquist_hz``."""
        from .grid import Grid

        g = dict(self.grid_values)
        response = self.grid_value("response")
        top = min(20000.0, 0.95 * nyquist_hz)
        if response in ("lowpass", "highpass") and not g.get("cutoffs"):
            lo, hi = (min(2000.0, top / 4), top) if response == "lowpass" else (10.0, min(500.0, top / 4))
            g["cutoffs"] = tuple(units.parse_grid(f"{lo}:{hi}:{EDGES['cutoffs']}", name="default --cutoffs"))
        if response == "bandpass":
            if not g.get("low_edges"):
                g["low_edges"] = tuple(
                    units.parse_grid(f"10:{min(400.0, top / 8)}:{EDGES['low_edges']}", name="default --low-edges")
                )
            if not g.get("high_edges"):
                g["high_edges"] = tuple(
                    units.parse_grid(f"{min(2000.0, top / 4)}:{top}:{EDGES['high_edges']}", name="default --high-edges")
                )
        given = {FIELD_OF_GRID_KEY[k]: v for k, v in g.items() if k in FIELD_OF_GRID_KEY}
        return Grid(**given)  # the fields not given keep the defaults of audiobw.options

    def to_json(self) -> dict:
        """Every field as plain JSON data (what travels to the batch workers; :meth:`from_json` reads it back).

        Tuples become lists and dataclasses mappings (``json.dumps`` writes the audiogram's
        frequencies as strings; :meth:`from_json` reads them back as numbers).
        """
        return {f.name: _plain(getattr(self, f.name)) for f in fields(self) if f.name != "origins"}

    @classmethod
    def from_json(cls, data: dict) -> Settings:
        """The settings back from :meth:`to_json` output (equal to the ones written)."""
        kw = {f.name: data[f.name] for f in fields(cls) if f.name in data and f.name != "origins"}
        kw["chain"] = Chain.from_json(data["chain"])
        kw["meter"] = Meter(**data["meter"])
        kw["grid_values"] = {k: tuple(v) if isinstance(v, list) else v for k, v in data["grid_values"].items()}
        kw["targets"] = dict(data["targets"])
        if data.get("input_level") is not None:
            kw["input_level"] = tuple(data["input_level"])
        if data.get("listening"):
            from .perceptual.scoring import Listening

            ls = data["listening"]
            ag = ls.get("audiogram_hl")
            kw["listening"] = Listening(
                ls["program"], ls.get("playback_spl_db"), {float(k): float(v) for k, v in ag.items()} if ag else None
            )
        if "default_targets" in data:
            kw["default_targets"] = tuple(data["default_targets"])
        return cls(**kw)

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

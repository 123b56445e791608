"""The chain model: source, amplifier, candidate filter, converter.

::

    source (Rs, T) -> amplifier (G, e_n, i_n, h2, h3) -> [filter] -> converter (N bits, FS, dither)

With ``stage='digital'`` the converter comes ahead of the filter, which is
then DSP.

Levels follow AES17: digital full scale is the peak of a full-scale sine, and
``full_scale_vrms`` is the rms voltage of that sine at the converter input.
The file's samples are the clean program as it arrives at the converter
input, so a sample value x corresponds to x·√2·full_scale_vrms volts.

References
----------
.. [1] J. B. Johnson, "Thermal agitation of electricity in conductors",
   Phys. Rev. 32, 97 (1928); H. Nyquist, "Thermal agitation of electric
   charge in conductors", Phys. Rev. 32, 110 (1928): v² = 4kTRB.
.. [2] AES17-2020, *AES standard method for digital audio engineering -
   Measurement of digital audio equipment*, §3 (definitions: full-scale
   amplitude, dBFS).
.. [3] W. R. Bennett, "Spectra of quantized signals", Bell Syst. Tech. J.
   27, 446 (1948): quantisation error power q²/12.
.. [4] R. A. Wannamaker, S. P. Lipshitz, J. Vanderkooy, J. N. Wright, "A
   theory of nonsubtractive dither", IEEE Trans. Signal Process. 48(2),
   2000: TPDF dither of 2 LSB peak-to-peak adds q²/6 (total 3·q²/12).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields


from .errors import ParameterError
from .options import default, model_fields

#: J/K, exact by definition since the 2019 SI revision (BIPM, The International System of
#: Units, 9th ed., 2019, §2.2); equal to scipy.constants.k (tests/test_chain_noise_figure.py).
#: Written out so the sweep does not import scipy.constants (about 0.1 s of start-up).
BOLTZMANN = 1.380649e-23
DBU_REF_VRMS = math.sqrt(0.6)  # 0 dBu: 1 mW into 600 Ω
DITHERS = ("tpdf", "none")
#: What stands between the chain and the converter's sampler above fs/2 (see :mod:`audiobw.noise`).
ANTI_ALIAS = ("ideal", "none")
#: the fields an option fills, with its limits
CHAIN_FIELDS = model_fields("Chain")


@dataclass(frozen=True)
class Chain:
    """Every parameter of the modelled chain, in SI units.

    Parameters
    ----------
    source_ohms : float, >= 0
        Source resistance Rs in Ω (0 is an ideal source).
    temperature_k : float, > 0
        Source temperature T in K.
    gain_db : float
        Amplifier voltage gain G in dB.
    en_v_rthz : float, >= 0
        Amplifier input voltage noise density in V/√Hz.
    in_a_rthz : float, >= 0
        Amplifier input current noise density in A/√Hz.
    h2_db, h3_db : float or None, <= 0
        2nd and 3rd harmonic levels in dB relative to the fundamental for a
        full-scale sine (None: a linear amplifier).
    amp_bandwidth_hz : float or None, > 0
        The amplifier's own −3 dB bandwidth, modelled as one real pole acting
        on its noise; None: unlimited.
    bits : int, 1 <= bits <= 32
        Converter resolution N.
    full_scale_vrms : float, > 0
        rms voltage of a full-scale sine at the converter input, V.
    dither : {'tpdf', 'none'}
        Converter dither.
    stage : {'analog', 'digital'}
        Where the candidate filter sits: ahead of the converter (analog) or
        after it (digital).
    input_gain_db : float
        Gain applied to the file's program before it enters the model
        (from ``--input-level``); 0 leaves the samples as they are.
    en_corner_hz, in_corner_hz : float or None, > 0
        1/f (flicker) corners of the amplifier's noise densities, Hz:
        e_n(f)² = e_n²·(1 + f_ce/f), i_n(f)² = i_n²·(1 + f_ci/f) (the usual
        data-sheet model; Motchenbacher & Connelly ch. 2).  None: white.
    anti_alias : {'none', 'ideal'}
        One assumption for noise and harmonics alike.  'none' (default): no
        anti-alias filter of the converter's own; everything that reaches it
        above fs/2 folds into 0…fs/2 (on the analog stage the candidate is the
        only anti-alias filter), and the candidate or ``amp_bandwidth_hz``
        must bound the noise.  'ideal': a brick-wall at fs/2 ahead of the
        converter; nothing folds.
    en_table : tuple of (f_hz, e_n_v_rthz) pairs, or None
        A measured e_n density (``--en-table``; :mod:`audiobw.entable`): 2 to
        10 000 rows, frequencies strictly increasing, interpolated in log-log,
        held flat beyond both ends.  It replaces the white e_n and its corner:
        ``en_v_rthz`` is set to the value of its highest-frequency row (the
        white level), and the excess e_n(f)² − e_n,white² joins the 1/f path.
        Given with ``en_corner_hz`` it is refused.  None: no table.
    en_table_file : str or None
        The table's file name, as recorded in sweep.json (None without a table).
    """

    source_ohms: float = default("source_ohms")
    temperature_k: float = default("temperature")
    gain_db: float = default("gain")
    en_v_rthz: float = default("en")
    in_a_rthz: float = default("in")
    h2_db: float | None = None
    h3_db: float | None = None
    amp_bandwidth_hz: float | None = None
    bits: int = default("bits")
    full_scale_vrms: float = default("full_scale")
    dither: str = default("dither")
    stage: str = default("stage")
    input_gain_db: float = 0.0
    en_corner_hz: float | None = None
    in_corner_hz: float | None = None
    anti_alias: str = default("anti_alias")
    en_table: tuple | None = None
    en_table_file: str | None = None

    def __post_init__(self):
        """Check every field against its option's limits (:data:`audiobw.options.OPTIONS`), naming the field."""
        if self.en_table is not None:
            from .entable import check_rows

            table = check_rows(self.en_table, name="Chain.en_table")
            if self.en_corner_hz is not None:
                raise ParameterError(
                    "Chain.en_table: conflicts with Chain.en_corner_hz (the table gives e_n at every "
                    "frequency, its 1/f part included); accepted: one of them"
                )
            object.__setattr__(self, "en_table", table)
            object.__setattr__(self, "en_v_rthz", table[-1][1])
        elif self.en_table_file is not None:
            raise ParameterError(
                f"Chain.en_table_file: a file name ({self.en_table_file!r}) without its rows; "
                "accepted: en_table given with en_table_file"
            )
        for name, option in CHAIN_FIELDS.items():
            value = getattr(self, name)
            if value is not None or option.default is not None:
                option.check(value, f"Chain.{name}")

    # -- derived quantities -------------------------------------------------
    @property
    def gain(self) -> float:
        """Linear voltage gain G."""
        return 10.0 ** (self.gain_db / 20.0)

    @property
    def volts_per_unit(self) -> float:
        """Volts at the converter input per unit sample value (√2·FS rms)."""
        return math.sqrt(2.0) * self.full_scale_vrms * 10.0 ** (self.input_gain_db / 20.0)

    @property
    def full_scale_power_v2(self) -> float:
        """Power of a full-scale sine at the converter input, V²."""
        return self.full_scale_vrms**2

    def density_source_v2_hz(self) -> float:
        """Source thermal noise at the converter input, G²·4kT·Rs (V²/Hz)."""
        return self.gain**2 * 4.0 * BOLTZMANN * self.temperature_k * self.source_ohms

    def density_en_v2_hz(self) -> float:
        """Amplifier voltage noise at the converter input, G²·e_n² (V²/Hz)."""
        return self.gain**2 * self.en_v_rthz**2

    def density_in_v2_hz(self) -> float:
        """Amplifier current noise through the source, G²·(i_n·Rs)² (V²/Hz)."""
        return self.gain**2 * (self.in_a_rthz * self.source_ohms) ** 2

    def density_amplifier_v2_hz(self) -> float:
        """All analog white noise at the converter input, G²(4kTRs + e_n² + (i_n Rs)²)."""
        return self.density_source_v2_hz() + self.density_en_v2_hz() + self.density_in_v2_hz()

    def flicker_en_v2(self) -> float:
        """The 1/f part of e_n at the converter input as a coefficient of 1/f: G²·e_n²·f_ce (V²)."""
        return self.density_en_v2_hz() * (self.en_corner_hz or 0.0)

    def flicker_in_v2(self) -> float:
        """The 1/f part of i_n·Rs at the converter input: G²·(i_n·Rs)²·f_ci (V²)."""
        return self.density_in_v2_hz() * (self.in_corner_hz or 0.0)

    @property
    def has_flicker(self) -> bool:
        """True when the densities are not white: a 1/f corner, or an e_n table that is not flat."""
        from .entable import is_flat

        return bool(
            self.en_corner_hz or self.in_corner_hz or (self.en_table is not None and not is_flat(self.en_table))
        )

    @property
    def lsb_v(self) -> float:
        """Quantisation step q = 2·√2·FS / 2^N in V."""
        return 2.0 * math.sqrt(2.0) * self.full_scale_vrms / 2.0 ** int(self.bits)

    def quantisation_power_v2(self) -> float:
        """Rounding error power q²/12 (V²), white over 0…fs/2."""
        return self.lsb_v**2 / 12.0

    def dither_power_v2(self) -> float:
        """TPDF dither power 2·q²/12 (V²); 0 without dither."""
        return 2.0 * self.lsb_v**2 / 12.0 if self.dither == "tpdf" else 0.0

    def to_json(self) -> dict:
        """Every parameter with its SI unit in the key name (the e_n table as [f_hz, e_n] lists)."""
        out = asdict(self)
        if self.en_table is not None:
            out["en_table"] = [list(row) for row in self.en_table]
        return out

    @classmethod
    def from_json(cls, data: dict) -> Chain:
        """The chain back from :meth:`to_json` (sweep.json's ``chain``); keys it does not know are left out."""
        known = cls.field_names()
        return cls(**{k: v for k, v in data.items() if k in known})

    @classmethod
    def field_names(cls) -> tuple[str, ...]:
        return tuple(f.name for f in fields(cls))


def vrms_to_dbu(v: float) -> float:
    """Voltage in V rms to dBu (0 dBu = √0.6 V, common practice)."""
    return 20.0 * math.log10(v / DBU_REF_VRMS) if v > 0 else -math.inf


def johnson_noise_vrms(resistance_ohms: float, temperature_k: float, bandwidth_hz: float) -> float:
    """Open-circuit thermal noise voltage √(4kTRB) in V rms (Johnson–Nyquist)."""
    return math.sqrt(4.0 * BOLTZMANN * temperature_k * resistance_ohms * bandwidth_hz)

"""What a library sweep needs besides the recording: the typed study.

:class:`Study` gathers a :class:`~audiobw.chain.Chain`, a :class:`Grid`,
:class:`Targets`, a :class:`~audiobw.metrics.Meter`, a :class:`Program` and
the listening conditions, and turns them into the command line's
:class:`~audiobw.model.Settings` (:meth:`Study.settings`).  Refusals name the
study's fields (``Grid.cutoffs_hz``), not command-line flags.  Re-exported by
:mod:`audiobw.api` and :mod:`audiobw`.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

from .chain import Chain
from .errors import ParameterError
from .grid import Grid as _BaseGrid
from .metrics import TARGET_KEYS, Meter
from .options import FAMILIES, MAX_ORDER, MIN_ORDER, RESPONSES, default
from .model import Settings

#: the command's grid defaults (audiobw.options)
FAMILIES_DEFAULT, ORDERS_DEFAULT = default("family"), default("order")


def _log_grid(start_hz: float, stop_hz: float, count: int, *, name: str) -> tuple[float, ...]:
    """``count`` log-spaced frequencies from ``start_hz`` to ``stop_hz`` inclusive (as START:STOP:COUNT)."""
    from . import units

    if not (math.isfinite(start_hz) and math.isfinite(stop_hz)) or not 0 < start_hz < stop_hz:
        raise ParameterError(f"{name}: start {start_hz!r} Hz, stop {stop_hz!r} Hz; accepted: 0 < start < stop, in Hz")
    if isinstance(count, bool) or not isinstance(count, int) or count < 1:
        raise ParameterError(f"{name}: count {count!r}; accepted: an integer >= 1")
    return tuple(units.parse_grid(f"{start_hz!r}:{stop_hz!r}:{count}", name=name))


@dataclasses.dataclass(frozen=True)
class Grid(_BaseGrid):
    """The candidate filters of a sweep (see :class:`audiobw.grid.Grid` for the fields).

    Build one with :meth:`lowpass`, :meth:`highpass` or :meth:`bandpass`; the
    edges are log-spaced exactly like the command line's ``START:STOP:COUNT``.
    ``ripple_db`` (Chebyshev/elliptic passband ripple, dB) and ``stopband_db``
    (elliptic/Chebyshev II stopband attenuation, dB) keep the command's defaults.
    """

    @classmethod
    def lowpass(
        cls, start_hz: float, stop_hz: float, count: int, *, families=FAMILIES_DEFAULT, orders=ORDERS_DEFAULT, **kw
    ) -> Grid:
        """Lowpass cases with the upper edge swept over ``count`` log-spaced values.

        Parameters
        ----------
        start_hz, stop_hz : float
            First and last cutoff, Hz.
        count : int
            Number of cutoffs (>= 1).
        families : tuple of str
            Filter families (``audiobw.options.FAMILIES``).
        orders : tuple of int
            Filter orders.
        """
        return cls(
            response="lowpass",
            families=tuple(families),
            orders=tuple(orders),
            cutoffs_hz=_log_grid(start_hz, stop_hz, count, name="Grid.lowpass"),
            **kw,
        )

    @classmethod
    def highpass(
        cls, start_hz: float, stop_hz: float, count: int, *, families=FAMILIES_DEFAULT, orders=ORDERS_DEFAULT, **kw
    ) -> Grid:
        """Highpass cases with the lower edge swept over ``count`` log-spaced values (Hz)."""
        return cls(
            response="highpass",
            families=tuple(families),
            orders=tuple(orders),
            cutoffs_hz=_log_grid(start_hz, stop_hz, count, name="Grid.highpass"),
            **kw,
        )

    @classmethod
    def bandpass(
        cls,
        low: tuple[float, float, int],
        high: tuple[float, float, int],
        *,
        families=FAMILIES_DEFAULT,
        orders=ORDERS_DEFAULT,
        **kw,
    ) -> Grid:
        """Bandpass cases: every (low edge, high edge) pair with low < high.

        Parameters
        ----------
        low, high : (start_hz, stop_hz, count)
            Log-spaced grids of the lower and upper edges, Hz.
        """
        return cls(
            response="bandpass",
            families=tuple(families),
            orders=tuple(orders),
            low_edges_hz=_log_grid(*low, name="Grid.bandpass low"),
            high_edges_hz=_log_grid(*high, name="Grid.bandpass high"),
            **kw,
        )

    def check(self) -> None:
        """Refuse a grid that cannot be swept, naming the field (library terms)."""
        if self.response not in RESPONSES:
            raise ParameterError(f"Grid.response: {self.response!r}; accepted: {', '.join(RESPONSES)}")
        bad = [f for f in self.families if f not in FAMILIES]
        if bad or not self.families:
            raise ParameterError(f"Grid.families: {list(self.families)!r}; accepted: {', '.join(FAMILIES)}")
        if not self.orders or any(
            isinstance(o, bool) or not isinstance(o, int) or not MIN_ORDER <= o <= MAX_ORDER for o in self.orders
        ):
            raise ParameterError(f"Grid.orders: {list(self.orders)!r}; accepted: integers {MIN_ORDER}..{MAX_ORDER}")
        if self.response == "bandpass":
            if not self.low_edges_hz or not self.high_edges_hz:
                raise ParameterError(
                    "Grid.low_edges_hz/high_edges_hz: a bandpass grid needs both edge grids; "
                    "accepted: Grid.bandpass((start, stop, count), (start, stop, count))"
                )
        elif not self.cutoffs_hz:
            raise ParameterError(
                f"Grid.cutoffs_hz: a {self.response} grid needs cutoffs; accepted: "
                f"Grid.{self.response}(start_hz, stop_hz, count), e.g. (2000, 20000, 16)"
            )

    def _grid_values(self) -> dict:
        return {
            "response": self.response,
            "family": tuple(self.families),
            "order": tuple(self.orders),
            "cutoffs": tuple(self.cutoffs_hz),
            "low_edges": tuple(self.low_edges_hz),
            "high_edges": tuple(self.high_edges_hz),
            "ripple": self.ripple_db,
            "stopband": self.stopband_db,
        }


_TargetFields = dataclasses.make_dataclass(
    "_TargetFields",
    [(k, "float | None", dataclasses.field(default=None)) for k in TARGET_KEYS],
    frozen=True,
    kw_only=True,
)


class Targets(_TargetFields):  # type: ignore[valid-type,misc]
    """The limits a passband must meet; field names are sweep.json's target keys.

    The fields come from :data:`audiobw.metrics.TARGET_KEYS` (for instance
    ``min_snr_db``, ``min_snr_a_db`` in dB, ``max_thdn_pct`` in %,
    ``max_loss_db``, ``max_lsd_db``, ``min_ser_db`` in dB); a field left at
    None sets no limit.  Unknown names are refused with the accepted list.
    """

    def __init__(self, **limits: float | None) -> None:
        unknown = sorted(set(limits) - set(TARGET_KEYS))
        if unknown:
            raise ParameterError(f"Targets: unknown {', '.join(unknown)}; accepted: {', '.join(TARGET_KEYS)}")
        for key, value in limits.items():
            if value is not None and (
                isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value)
            ):
                raise ParameterError(f"Targets.{key}: {value!r}; accepted: a finite number or None")
        super().__init__(**{k: None if v is None else float(v) for k, v in limits.items()})

    def to_dict(self) -> dict[str, float]:
        """The limits that are set, keyed as in sweep.json."""
        return {k: getattr(self, k) for k in TARGET_KEYS if getattr(self, k) is not None}


@dataclasses.dataclass(frozen=True)
class Program:
    """What the recording carries.

    Parameters
    ----------
    kind : {'music', 'speech', 'data'}
        'audio' is taken as 'music'.
    bit_rate_hz : float or 'auto', optional
        Data programs only: the bit rate, bit/s, or 'auto' to estimate it.
    """

    kind: str = "music"
    bit_rate_hz: float | str | None = None

    def check(self) -> None:
        if self.kind not in ("music", "speech", "audio", "data"):
            raise ParameterError(f"Program.kind: {self.kind!r}; accepted: music, speech, data")
        if self.kind == "data" and self.bit_rate_hz is None:
            raise ParameterError("Program.bit_rate_hz: a data program needs a bit rate; accepted: bit/s or 'auto'")
        if self.kind != "data" and self.bit_rate_hz is not None:
            raise ParameterError("Program.bit_rate_hz: applies to data programs only; accepted: kind='data'")


@dataclasses.dataclass(frozen=True)
class Study:
    """Everything a sweep needs besides the recording; every part optional.

    Parameters
    ----------
    chain : Chain, optional
        The modelled chain (default: the command's defaults).
    grid : Grid, optional
        The candidates; default: the command's default grid fitted to the
        recording's sample rate (lowpass, Butterworth order 4, 24 cutoffs).
    targets : Targets, optional
        As on the command line there is no default limit: a sweep needs at
        least one target set.
    meter : Meter, optional
        Measurement band and THD+N tone.
    program : Program, optional
        Music (default), speech or a data stream.
    listening : Listening, optional
        Playback conditions of a music or speech program (playback level in
        dB SPL, audiogram); default: the program kind's playback level.
    """

    chain: Chain = dataclasses.field(default_factory=Chain)
    grid: Grid | None = None
    targets: Targets = dataclasses.field(default_factory=Targets)
    meter: Meter = dataclasses.field(default_factory=Meter)
    program: Program = dataclasses.field(default_factory=Program)
    listening: Any = None

    def settings(self) -> Settings:
        """The study as the command line's :class:`audiobw.settings.Settings`."""
        if self.grid is not None:
            self.grid.check()
        self.program.check()
        targets = self.targets.to_dict()
        kind = "music" if self.program.kind == "audio" else self.program.kind
        from .settings import program_defaults

        spl = getattr(self.listening, "playback_spl_db", None)
        audiogram = getattr(self.listening, "audiogram_hl", None)
        listening, added = program_defaults(kind, targets, spl, audiogram)
        if not targets:
            raise ParameterError(f"Study.targets: none set; accepted: at least one of {', '.join(TARGET_KEYS)}")
        data_only = [k for k in ("max_ber", "min_eye") if k in targets]
        if data_only and self.program.kind != "data":
            raise ParameterError(
                f"Targets.{data_only[0]}: applies to data programs only; accepted: Program(kind='data', ...)"
            )
        return Settings(
            chain=self.chain,
            grid_values=self.grid._grid_values() if self.grid else {},
            meter=self.meter,
            targets=targets,
            input_level=None,
            program=kind,
            bit_rate=self.program.bit_rate_hz,
            listening=listening,
            default_targets=tuple(added),
        )

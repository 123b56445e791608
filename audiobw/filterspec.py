"""One candidate filter as specified (:class:`FilterSpec`) and the check that it can be designed.

Edge conventions per family: :mod:`audiobw.filters`.
"""

from __future__ import annotations

from dataclasses import dataclass

from .errors import ParameterError
from .options import FAMILIES, MAX_ORDER, MIN_ORDER, RESPONSES, STAGES


@dataclass(frozen=True)
class FilterSpec:
    """One candidate filter.

    Parameters
    ----------
    response : {'lowpass', 'highpass', 'bandpass'}
    family : {'butterworth', 'bessel', 'chebyshev1', 'elliptic'}
    order : int, 1 <= order <= 8
        Prototype order.
    low_hz, high_hz : float or None
        Design edges in Hz (see module notes for each family's convention);
        ``low_hz`` is None for a lowpass, ``high_hz`` None for a highpass.
    ripple_db : float, 0 < ripple_db < 3
        Passband ripple (Chebyshev I, elliptic).
    stopband_db : float, > ripple_db
        Minimum stopband attenuation (elliptic).
    stage : {'analog', 'digital'}
        Analog prototype ahead of the converter, or its bilinear, prewarped
        digital form after it.
    fs_hz : float or None
        Sample rate in Hz; required for the digital stage.
    """

    response: str
    family: str
    order: int
    low_hz: float | None
    high_hz: float | None
    ripple_db: float = 0.1
    stopband_db: float = 60.0
    stage: str = "analog"
    fs_hz: float | None = None

    @property
    def poles(self) -> int:
        """The true number of poles (a bandpass doubles the prototype order)."""
        return 2 * self.order if self.response == "bandpass" else self.order

    def label(self) -> str:
        """Short human label, e.g. ``'butterworth 4 lowpass 9.5 kHz'``."""
        from .units import format_quantity

        lo = format_quantity(self.low_hz, "Hz") if self.low_hz else ""
        hi = format_quantity(self.high_hz, "Hz") if self.high_hz else ""
        band = {"lowpass": f"below {hi}", "highpass": f"above {lo}"}.get(self.response, f"{lo} to {hi}")
        return f"{self.family} order {self.order} {self.response} {band}"


def validate_spec(spec: FilterSpec, *, fs_hz: float, name: str = "filter") -> None:
    """Refuse a spec that cannot be designed at sample rate ``fs_hz``.

    Raises
    ------
    ParameterError
        With the offending value and the accepted range, e.g.
        ``--cutoffs: 30000 Hz must be 0 < edge < fs/2 (fs=48000 -> fs/2=24000)``.
    """
    if spec.family not in FAMILIES:
        raise ParameterError(f"--family: {spec.family!r} is not known; accepted: {', '.join(FAMILIES)}")
    if spec.response not in RESPONSES:
        raise ParameterError(f"--response: {spec.response!r} is not known; accepted: {', '.join(RESPONSES)}")
    if spec.stage not in STAGES:
        raise ParameterError(f"--stage: {spec.stage!r} is not known; accepted: {', '.join(STAGES)}")
    if not (MIN_ORDER <= int(spec.order) <= MAX_ORDER) or int(spec.order) != spec.order:
        raise ParameterError(f"--order: {spec.order!r} is out of range; accepted: integers {MIN_ORDER} to {MAX_ORDER}")
    nyq = fs_hz / 2.0
    needs = {"lowpass": ("high_hz",), "highpass": ("low_hz",), "bandpass": ("low_hz", "high_hz")}[spec.response]
    for attr in ("low_hz", "high_hz"):
        value = getattr(spec, attr)
        if attr in needs:
            if value is None:
                raise ParameterError(f"{name}: a {spec.response} needs a {'low' if attr == 'low_hz' else 'high'} edge")
            # 2 % below Nyquist: the bilinear prewarp (tan) and the program
            # grid both degenerate at fs/2 itself.
            if not (0.0 < value < 0.98 * nyq):
                raise ParameterError(
                    f"{name}: edge {value:g} Hz must be 0 < edge < 0.98*fs/2 "
                    f"(fs={fs_hz:g} -> 0.98*fs/2={0.98 * nyq:g} Hz)"
                )
    if spec.response == "bandpass" and not spec.low_hz < spec.high_hz:
        raise ParameterError(
            f"{name}: low edge {spec.low_hz:g} Hz is not below high edge {spec.high_hz:g} Hz; accepted: LOW < HIGH"
        )
    if spec.family in ("chebyshev1", "elliptic") and not (0.0 < spec.ripple_db < 3.0):
        raise ParameterError(f"--ripple: {spec.ripple_db!r} dB is out of range; accepted: 0 < ripple < 3 dB")
    if spec.family == "elliptic" and not (spec.stopband_db > spec.ripple_db and spec.stopband_db <= 200):
        raise ParameterError(
            f"--stopband: {spec.stopband_db!r} dB is out of range; accepted: ripple < stopband <= 200 dB"
        )

"""A measured amplifier voltage-noise density table (``--en-table FILE.csv``).

Rows are (frequency in Hz, e_n in V/√Hz), as read off a data sheet's noise
plot or measured.  The density between rows is interpolated linearly in
log-log (a power law per segment, e_n² = e_i²·(f/f_i)^b), held flat at the
last row's value above the last row and held flat at the first row's value
below the first row.  Flat below, not 1/f: a table says nothing about the
frequencies it does not cover, and a flat hold keeps every row's effect on the
noise one-signed (raising a row never lowers the noise); a table that stops
above 0.1 Hz therefore under-states a DC-coupled chain's 1/f noise below its
first row (add rows down to 0.1 Hz to count it).

The chain keeps the table's highest-frequency value as its white e_n
(``Chain.en_v_rthz``, used by the noise figure, the folding of images and
the time-domain render); the table adds the excess e_n(f)² − e_n,white²
through the same path as the 1/f corners (:mod:`audiobw.noise`): averaged
exactly over each analysis bin, integrated from the 0.1 Hz floor, shaped
by the filter, not folded.

References
----------
.. [1] C. D. Motchenbacher, J. A. Connelly, *Low-Noise Electronic System
   Design*, Wiley 1993, ch. 2 (e_n(f) curves of data sheets; the noise of a
   band as the integral of the density squared).
.. [2] Integral of a power law: ∫ a·x^b dx = a·x^(b+1)/(b+1), or a·ln x
   for b = −1 (common practice).
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np

from .errors import ParameterError

#: the most rows a table may hold (a data-sheet curve needs tens; more is a mistake or hostile)
MAX_ROWS = 10_000
#: e_n range, V/√Hz: the range accepted for --en (audiobw.units 'voltage_density'), above 0 for log-log
EN_RANGE = (0.0, 1e-3)
#: frequency range, Hz: the range accepted for any frequency option (audiobw.units 'frequency')
FREQ_RANGE = (1e-3, 1e9)
MAX_BYTES = 2_000_000
ACCEPTED = (
    f"accepted: a CSV file of 2 to {MAX_ROWS} rows 'frequency_Hz,e_n_V_per_rtHz' (one header line "
    f"allowed), frequencies {FREQ_RANGE[0]:g} to {FREQ_RANGE[1]:g} Hz strictly increasing, e_n above 0 and "
    f"at most {EN_RANGE[1]:g} V/√Hz"
)


def check_rows(rows, *, name: str) -> tuple[tuple[float, float], ...]:
    """The table as a tuple of (f_hz, e_n) float pairs, or :class:`ParameterError` naming the bad row.

    ``name`` leads the message (``--en-table: 'noise.csv'`` or ``Chain.en_table``); rows
    are counted from 1 in the order given.
    """
    try:
        pairs = [tuple(r) for r in rows]
    except TypeError:
        raise ParameterError(f"{name}: not a list of (frequency, e_n) rows; {ACCEPTED}") from None
    if len(pairs) > MAX_ROWS:
        raise ParameterError(f"{name}: {len(pairs)} rows; {ACCEPTED}")
    if len(pairs) < 2:
        raise ParameterError(f"{name}: {len(pairs)} row{'s' if len(pairs) != 1 else ''}; {ACCEPTED}")
    out: list[tuple[float, float]] = []
    for i, pair in enumerate(pairs, start=1):
        if len(pair) != 2 or any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in pair):
            raise ParameterError(f"{name}: row {i}: {pair!r} is not two numbers; {ACCEPTED}")
        f, e = float(pair[0]), float(pair[1])
        if not (math.isfinite(f) and FREQ_RANGE[0] <= f <= FREQ_RANGE[1]):
            raise ParameterError(
                f"{name}: row {i}: frequency {pair[0]!r} is outside {FREQ_RANGE[0]:g} to "
                f"{FREQ_RANGE[1]:g} Hz; {ACCEPTED}"
            )
        if not (math.isfinite(e) and EN_RANGE[0] < e <= EN_RANGE[1]):
            raise ParameterError(
                f"{name}: row {i}: e_n {pair[1]!r} is outside the physical range (above 0, at "
                f"most {EN_RANGE[1]:g} V/√Hz); {ACCEPTED}"
            )
        if out and not f > out[-1][0]:
            raise ParameterError(
                f"{name}: row {i}: frequency {pair[0]!r} Hz is not above the previous row's "
                f"{out[-1][0]:g} Hz (frequencies must increase strictly); {ACCEPTED}"
            )
        out.append((f, e))
    return tuple(out)


def read_table(path, *, origin: str) -> tuple[tuple[float, float], ...]:
    """Read and check a table file; every refusal is one :class:`ParameterError` line.

    ``origin`` names where the path came from (``--en-table`` or a TOML key).  Cells are
    plain numbers (``1e-9``, ``12.5``); a first line that is not numbers is a header.
    Rows are counted as lines of the file, from 1.
    """
    p = Path(path)
    where = f"{origin}: {str(p)!r}"
    try:
        if p.is_file() and p.stat().st_size > MAX_BYTES:
            raise ParameterError(f"{where}: {p.stat().st_size} bytes is too large; {ACCEPTED}")
        text = p.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise ParameterError(f"{where}: no such file; {ACCEPTED}") from None
    except IsADirectoryError:
        raise ParameterError(f"{where}: is a folder; {ACCEPTED}") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ParameterError(f"{where}: cannot read ({type(exc).__name__}); {ACCEPTED}") from None
    rows: list[tuple[float, float]] = []
    lines: list[int] = []
    for lineno, cells in enumerate(csv.reader(text.splitlines()), start=1):
        cells = [c.strip() for c in cells]
        if not any(cells) or cells[0].startswith("#"):
            continue
        try:
            values = [float(c) for c in cells]
        except ValueError:
            if not rows and lineno == _first_content_line(text):
                continue  # the header
            bad = next(c for c in cells if not _is_number(c))
            raise ParameterError(f"{where}: row {lineno}: {bad[:40]!r} is not a number; {ACCEPTED}") from None
        if len(values) != 2:
            raise ParameterError(f"{where}: row {lineno}: {len(values)} cells; {ACCEPTED}")
        rows.append((values[0], values[1]))
        lines.append(lineno)
        if len(rows) > MAX_ROWS:
            raise ParameterError(f"{where}: more than {MAX_ROWS} rows; {ACCEPTED}")
    try:
        return check_rows(rows, name=where)
    except ParameterError as exc:  # name the file's line, not the row's index among the numbers
        msg = str(exc)
        prefix = f"{where}: row "
        if msg.startswith(prefix):
            index, rest = msg[len(prefix) :].split(":", 1)
            msg = f"{prefix}{lines[int(index) - 1]}:{rest}"
        raise ParameterError(msg) from None


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _first_content_line(text: str) -> int:
    for lineno, line in enumerate(text.splitlines(), start=1):
        s = line.strip()
        if s.strip(",") and not s.startswith("#"):
            return lineno
    return 0


def is_flat(table) -> bool:
    """True when every row holds the same e_n: the table is then the white model exactly."""
    return table is not None and all(e == table[-1][1] for _, e in table)


def density_v2_hz(table, freqs_hz) -> np.ndarray:
    """e_n(f)² on ``freqs_hz`` (V²/Hz): log-log interpolation, flat beyond both ends."""
    f = np.asarray(freqs_hz, dtype=float)
    t = np.asarray(table, dtype=float)
    lf, le = np.log(t[:, 0]), 2.0 * np.log(t[:, 1])
    with np.errstate(divide="ignore"):
        x = np.log(np.maximum(f, t[0, 0]))
    return np.exp(np.interp(x, lf, le))


def _antiderivative(table, x: np.ndarray) -> np.ndarray:
    """A(x) = ∫₀ˣ (e_n(f)² − e_n,white²) df, exactly for the piecewise power law (reference [2])."""
    t = np.asarray(table, dtype=float)
    fk, pk = t[:, 0], t[:, 1] ** 2
    pw = pk[-1]
    ratio = np.log(fk[1:] / fk[:-1])
    slope = np.log(pk[1:] / pk[:-1]) / ratio  # b per segment
    # ∫ over each whole segment of P: P_i·f_i·L·E((b+1)L), E(u) = expm1(u)/u
    seg = pk[:-1] * fk[:-1] * ratio * _expm1_over((slope + 1.0) * ratio) - pw * (fk[1:] - fk[:-1])
    knots = np.concatenate([[(pk[0] - pw) * fk[0]], (pk[0] - pw) * fk[0] + np.cumsum(seg)])
    x = np.asarray(x, dtype=float)
    out = np.empty_like(x)
    below = x <= fk[0]
    above = x >= fk[-1]
    out[below] = (pk[0] - pw) * x[below]
    out[above] = knots[-1]
    mid = ~(below | above)
    if np.any(mid):
        xm = x[mid]
        i = np.clip(np.searchsorted(fk, xm, side="right") - 1, 0, fk.size - 2)
        lx = np.log(xm / fk[i])
        out[mid] = knots[i] + pk[i] * fk[i] * lx * _expm1_over((slope[i] + 1.0) * lx) - pw * (xm - fk[i])
    return out


def _expm1_over(u: np.ndarray) -> np.ndarray:
    """expm1(u)/u, 1 at u = 0."""
    u = np.asarray(u, dtype=float)
    small = np.abs(u) < 1e-12
    safe = np.where(small, 1.0, u)
    return np.where(small, 1.0 + 0.5 * u, np.expm1(safe) / safe)


def excess_per_hz(table, freqs_hz: np.ndarray, weights_hz: np.ndarray, floor_hz: float) -> np.ndarray:
    """Each bin's mean of e_n(f)² − e_n,white² over the band it stands for (V²/Hz), from ``floor_hz``.

    The bins are those of :func:`audiobw.noise.flicker_per_hz` (bin k from the
    midpoint to its lower neighbour to the midpoint to its upper one; the first
    from its own frequency, the last to its own), so Σ_k excess_k·w_k over whole
    bins is the exact integral of the excess from ``floor_hz``.  Zero for a flat
    table and above the last row.
    """
    f = np.asarray(freqs_hz, dtype=float)
    w = np.asarray(weights_hz, dtype=float)
    if f.size < 2 or table is None or is_flat(table):
        return np.zeros_like(f)
    mid = 0.5 * (f[1:] + f[:-1])
    lo = np.maximum(np.concatenate([[f[0]], mid]), floor_hz)
    hi = np.concatenate([mid, [f[-1]]])
    out = np.zeros_like(f)
    ok = (hi > lo) & (w > 0)
    out[ok] = (_antiderivative(table, hi[ok]) - _antiderivative(table, lo[ok])) / w[ok]
    return out


def summary(table, file_name: str | None = None) -> str:
    """'noise.csv, 12 rows, 1 Hz to 100 kHz (e_n 21.5 to 3.2 nV/√Hz)' for headers and spec sheets."""
    from .units import format_quantity

    head = f"{file_name}, " if file_name else ""
    return (
        f"{head}{len(table)} rows, {format_quantity(table[0][0], 'Hz')} to {format_quantity(table[-1][0], 'Hz')} "
        f"(e_n {format_quantity(table[0][1], 'V/√Hz')} to {format_quantity(table[-1][1], 'V/√Hz')})"
    )

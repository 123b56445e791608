"""``audiobw bits``: write a test bit stream of our own making (polar NRZ)."""

from __future__ import annotations

from pathlib import Path

import click

from ..clikit import CONTEXT

MAX_SAMPLES = 200_000_000  # 800 MB of float32; about 70 minutes at 48 kHz


@click.command("bits", context_settings=CONTEXT)
@click.option("--bit-rate", required=True, metavar="RATE", help="Bit rate, bit/s (e.g. 2k, 9600).")
@click.option(
    "--pattern",
    default="prbs7",
    show_default=True,
    type=click.Choice(["prbs7", "prbs9", "prbs15", "alternating", "random"]),
    help="Bit pattern: ITU-T O.150 PRBS, 1010..., or seeded random bits.",
)
@click.option("--bits-count", default="4096", show_default=True, metavar="N", help="Number of bits.")
@click.option(
    "--amplitude",
    default="1V",
    show_default=True,
    metavar="V",
    help="NRZ amplitude ±A at the converter input, V (or dBu).",
)
@click.option(
    "--full-scale",
    default="1.228",
    show_default=True,
    metavar="VRMS",
    help="rms of a full-scale sine at the converter input (sets the sample scale).",
)
@click.option("--rate", default="48k", show_default=True, metavar="HZ", help="Sample rate, Hz.")
@click.option("--seed", default="1", show_default=True, metavar="S", help="Seed for --pattern random (0 to 2^32-1).")
@click.option("--out", required=True, type=click.Path(path_type=Path), help="Output WAV or FLAC file.")
def command(bit_rate, pattern, bits_count, amplitude, full_scale, rate, seed, out):
    """Write a polar NRZ test stream (for `audiobw sweep --program data`).

    Example: audiobw bits --bit-rate 2k --pattern prbs7 --bits-count 4096 --amplitude 1V --out link.wav
    """
    import math

    from .. import units
    from ..audio import write_audio_atomic
    from ..datalink import nrz_stream, prbs
    from ..errors import ParameterError
    from ..values import parse_bit_rate

    r = parse_bit_rate(bit_rate, "--bit-rate")
    if r == "auto":
        raise ParameterError("--bit-rate: 'auto' is for recordings; accepted: a rate such as 2k")
    n = units.parse_int_list(bits_count, name="--bits-count", low=1, high=10_000_000)
    if len(n) != 1:
        raise ParameterError(f"--bits-count: {bits_count!r} is not one count; accepted: an integer, e.g. 4096")
    amp_v = units.parse_quantity(amplitude, "voltage", name="--amplitude")
    fs_v = units.parse_quantity(full_scale, "voltage", name="--full-scale")
    fs = units.parse_quantity(rate, "frequency", name="--rate")
    if not float(fs).is_integer() or not 8000 <= fs <= 384000:
        raise ParameterError(f"--rate: {rate!r} is out of range; accepted: an integer rate 8000 to 384000 Hz")
    if r > fs / 2:
        raise ParameterError(f"--bit-rate: {r:g} bit/s is above fs/2 = {fs / 2:g}; accepted: at most fs/2")
    seed = units.parse_int(seed, name="--seed", low=0, high=2**32 - 1)
    samples = n[0] * fs / r
    if samples > MAX_SAMPLES:
        raise ParameterError(
            f"--bit-rate: {bit_rate!r} with --bits-count {n[0]} at {fs:g} Hz makes {samples:.3g} "
            f"samples; accepted: at most {MAX_SAMPLES:,} samples (raise the bit rate or lower the count)"
        )
    peak = amp_v / (math.sqrt(2.0) * fs_v)  # samples: a full-scale sine has peak 1.0
    if peak > 1.0:
        raise ParameterError(
            f"--amplitude: {amplitude!r} exceeds full scale ({math.sqrt(2) * fs_v:.4g} V peak); "
            "accepted: at most the full-scale peak"
        )
    bits = prbs(pattern, n[0], seed=seed)
    x = nrz_stream(bits, r, fs, peak)
    suffix = out.suffix.lower()
    subtype = "PCM_24" if suffix == ".flac" else "FLOAT"
    write_audio_atomic(out, x[:, None], int(fs), subtype=subtype)
    click.echo(
        f"Wrote {out}: {n[0]} bits of {pattern} at {units.format_quantity(r, 'bit/s')}, ±{amp_v:g} V "
        f"({20 * math.log10(peak):.2f} dBFS peak), {x.size} samples at {int(fs)} Hz "
        f"({x.size / fs:.3f} s). Nyquist minimum bandwidth 1/(2T): {units.format_quantity(r / 2, 'Hz')}."
    )

"""``audiobw render``: simulate one chain on a recording and write A/B clips.

Parsing and printing only; the work is in :mod:`audiobw.render`.
"""

from __future__ import annotations

from pathlib import Path

import click

from ..clikit import CHAIN, CONTEXT, LISTENING_CAUTION, Progress, chain_file_option, options, settings_from


def _loudness(text: str) -> float:
    from ..units import parse_quantity

    raw = str(text).strip()
    for unit in ("LUFS", "LKFS", "lufs", "lkfs"):
        if raw.endswith(unit):
            raw = raw[: -len(unit)].strip()
            break
    return parse_quantity(raw, "db", name="--loudness")


@click.command("render", context_settings=CONTEXT)
@click.argument("input", type=click.Path(path_type=Path))
@click.option(
    "--band",
    required=True,
    metavar="LOW:HIGH",
    help="Passband edges in Hz, e.g. 40:9.5k; :9.5k for a lowpass, 40: for a highpass.",
)
@click.option(
    "--family",
    default="butterworth",
    show_default=True,
    metavar="NAME",
    help="Filter family: butterworth, bessel, chebyshev1, elliptic.",
)
@click.option("--order", default="4", show_default=True, metavar="N", help="Prototype order (1 to 8).")
@click.option("--ripple", default=None, metavar="DB", help="Passband ripple, dB [default: 0.1].")
@click.option("--stopband", default=None, metavar="DB", help="Elliptic stopband attenuation, dB [default: 60].")
@click.option(
    "--out",
    type=click.Path(path_type=Path),
    default=None,
    help="Output folder [default: audiobw-out/<input name>/render/].",
)
@click.option(
    "--loudness",
    default="-23LUFS",
    show_default=True,
    metavar="LUFS",
    help="BS.1770 integrated loudness of each A/B clip.",
)
@click.option(
    "--ceiling",
    default="-1dBFS",
    show_default=True,
    metavar="DBFS",
    help="True-peak ceiling of the clips (never exceeded).",
)
@click.option("--excerpt", default="12s", show_default=True, metavar="SECONDS", help="Length of the A/B clips.")
@click.option(
    "--excerpt-at",
    "excerpt_at",
    default=None,
    metavar="SECONDS",
    help="Start of the clips [default: where the input has most power in the band the filter removes].",
)
@click.option(
    "--trials",
    default=0,
    show_default=True,
    type=click.IntRange(0, 200),
    metavar="N",
    help="Write N blind pairs and an answer key.",
)
@click.option(
    "--seed",
    default="1",
    show_default=True,
    metavar="S",
    help="Seed of the chain's noise, dither and the trial order (0 to 2^32-1).",
)
@click.option(
    "--bit-rate",
    "bit_rate",
    default=None,
    metavar="RATE",
    help="For a data program: also write eye.png, the eye diagram of the chain output at this "
    "bit rate (bit/s, e.g. 2k, or auto).",
)
@chain_file_option
@options(CHAIN, "chain")
def command(
    input,
    band,
    family,
    order,
    ripple,
    stopband,
    out,
    loudness,
    ceiling,
    excerpt,
    excerpt_at,
    trials,
    seed,
    bit_rate,
    chain_file,
    **kwargs,
):
    """Simulate the chain on INPUT in the time domain and write loudness-matched A/B clips.

    Writes chain-output.wav (the chain output at its true level, 32-bit float),
    ab-reference.wav and ab-processed.wav (loudness-matched excerpts under a
    peak ceiling), render-notes.txt, render.json, and with --trials N a blind
    set in blind/ with its key in trial-key.json.

    Example:

      audiobw render take3.flac --band 40:9.5k --family butterworth --order 4 --out ab/
    """
    from .. import units
    from ..audio import open_info
    from ..names import shown
    from ..filters import FilterSpec
    from ..render import RenderOptions, render_file

    kwargs.update(family=family, order=order, ripple=ripple, stopband=stopband)
    settings = settings_from(kwargs, chain_file)
    lo, hi = units.parse_band(band, name="--band")
    response = "bandpass" if lo and hi else ("lowpass" if hi else "highpass")
    families, orders = settings.grid_value("family"), settings.grid_value("order")
    if len(families) != 1 or len(orders) != 1:
        raise click.BadParameter("give one family and one order", param_hint="--family/--order")
    opts = RenderOptions(
        loudness_lufs=_loudness(loudness),
        ceiling_dbfs=units.parse_quantity(ceiling, "level_dbfs", name="--ceiling"),
        excerpt_s=units.parse_quantity(excerpt, "seconds", name="--excerpt"),
        excerpt_start_s=(
            None
            if excerpt_at is None
            else units.parse_quantity(excerpt_at, "seconds", name="--excerpt-at")
            if str(excerpt_at).strip() not in ("0", "0s")
            else 0.0
        ),
        trials=trials,
        seed=units.parse_int(seed, name="--seed", low=0, high=2**32 - 1),
    )
    info = open_info(input)
    spec = FilterSpec(
        response,
        families[0],
        int(orders[0]),
        lo,
        hi,
        settings.grid_value("ripple"),
        settings.grid_value("stopband"),
        settings.chain.stage,
        info.sample_rate_hz,
    )
    out_dir = out or Path.cwd() / "audiobw-out" / input.stem / "render"
    progress = Progress(f"rendering {shown(input.name)}")
    try:
        result = render_file(input, spec, settings, out_dir, opts, progress=progress)
    finally:
        progress.close()
    f = result.facts
    click.echo(f"Rendered {f['filter']['label']} ({f['filter']['stage']} stage) into {result.out_dir}:")
    for p in result.paths:
        if p.parent == result.out_dir:
            click.echo(f"  {p.name}")
    if f["trials"]:
        click.echo(f"  blind/ ({f['trials']['count']} pairs; key in {f['trials']['key']}, keep it from the listeners)")
    for clip in f["clips"].values():
        click.echo(f"{clip['file']}: {clip['loudness_lufs']:.2f} LUFS, true peak {clip['true_peak_dbfs']:.2f} dBFS")
    from ..render import noise_check_lines

    for line in noise_check_lines(f["noise_check"]):
        click.echo(line)
    if settings.chain.has_flicker:
        from ..render import WHITE_ONLY

        click.echo(f"Note: {WHITE_ONLY}.")
    if bit_rate is not None:
        from ..datalink import recover_bit_rate
        from ..report.eye import eye_diagram
        from ..values import parse_bit_rate

        rate = parse_bit_rate(bit_rate, "--bit-rate")
        if rate == "auto":
            rate, _ = recover_bit_rate(input)
        eye = eye_diagram(result.out_dir / "chain-output.wav", rate, result.out_dir / "eye.png")
        click.echo(f"  {eye.name} (eye diagram at {units.format_quantity(rate, 'bit/s')})")
    if f["clipping"]["samples"]:
        click.echo(
            f"audiobw: warning: the converter clipped {f['clipping']['samples']} samples "
            f"(first at {f['clipping']['first_s']:.3f} s); see render-notes.txt",
            err=True,
        )
    click.echo(LISTENING_CAUTION)

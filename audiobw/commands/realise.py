"""``audiobw realise``: take a chosen passband to a board (stages, parts, noise, yield)."""

from __future__ import annotations

import json
from pathlib import Path

import click

from ..clikit import CONTEXT

#: Generic op-amp noise classes, named by their figures (e_n V/√Hz, i_n A/√Hz).
OPAMP_CLASSES = {"1n-2p": (1e-9, 2e-12), "4n-0.5p": (4e-9, 0.5e-12), "8n-10f": (8e-9, 10e-15), "20n-1f": (20e-9, 1e-15)}


@click.command("realise", context_settings=CONTEXT)
@click.argument("folder", required=False, type=click.Path(path_type=Path), metavar="[DIR]")
@click.option("--case", "case_id", type=int, default=None, help="Case id in DIR/sweep.json (default: the choice).")
@click.option("--band", default=None, metavar="LOW:HIGH", help="Without DIR: the passband, e.g. 20:15k, :9.5k, 40:.")
@click.option(
    "--family",
    default="butterworth",
    show_default=True,
    type=click.Choice(["butterworth", "bessel", "chebyshev1", "elliptic"]),
    help="Without DIR: family.",
)
@click.option("--order", default=4, show_default=True, type=click.IntRange(1, 8), help="Without DIR: order.")
@click.option("--ripple", default="0.1", show_default=True, metavar="DB", help="Without DIR: passband ripple, dB.")
@click.option(
    "--topology",
    default="sallen-key",
    show_default=True,
    type=click.Choice(["sallen-key", "mfb"]),
    help="Second-order section form (bandpass sections from an odd order are always MFB).",
)
@click.option(
    "--series",
    "r_series",
    default="E96",
    show_default=True,
    type=click.Choice(["E12", "E24", "E96"], case_sensitive=False),
    help="Resistor series (IEC 60063).",
)
@click.option(
    "--cap-series",
    "c_series",
    default="E12",
    show_default=True,
    type=click.Choice(["E6", "E12", "E24"], case_sensitive=False),
    help="Capacitor series; rule: the value nearest 1/(2π·f0·impedance), then the Q condition.",
)
@click.option("--impedance", default="10k", show_default=True, metavar="OHMS", help="Resistor level, Ω.")
@click.option(
    "--opamp",
    "opamp_class",
    default=None,
    type=click.Choice(sorted(OPAMP_CLASSES)),
    help="Generic op-amp noise class e_n-i_n (V/√Hz-A/√Hz); overrides --opamp-en/--opamp-in.",
)
@click.option("--opamp-en", default="4n", show_default=True, metavar="V/√Hz", help="Op-amp voltage noise.")
@click.option("--opamp-in", default="0.5p", show_default=True, metavar="A/√Hz", help="Op-amp current noise.")
@click.option("--temperature", default="290", show_default=True, metavar="K", help="Part temperature, K.")
@click.option("--tolerance-r", default="1%", show_default=True, metavar="PCT", help="Resistor tolerance.")
@click.option("--tolerance-c", default="5%", show_default=True, metavar="PCT", help="Capacitor tolerance.")
@click.option("--draws", default=1000, show_default=True, type=click.IntRange(10, 100000), help="Monte Carlo builds.")
@click.option(
    "--edge-tolerance",
    default="5%",
    show_default=True,
    metavar="PCT",
    help="Yield: a build's −3 dB edges must lie within this of the ideal's.",
)
@click.option(
    "--flatness-margin",
    default="0.5",
    show_default=True,
    metavar="DB",
    help="Yield: a build's passband flatness may exceed the ideal's by this much, dB.",
)
@click.option("--seed", default=1, show_default=True, type=int, help="Monte Carlo seed.")
@click.option(
    "--out", default=None, type=click.Path(path_type=Path), help="Output folder (default: DIR; required with --band)."
)
@click.option("--json", "as_json", is_flag=True, help="Print realise.json instead of the text.")
def command(
    folder,
    case_id,
    band,
    family,
    order,
    ripple,
    topology,
    r_series,
    c_series,
    impedance,
    opamp_class,
    opamp_en,
    opamp_in,
    temperature,
    tolerance_r,
    tolerance_c,
    draws,
    edge_tolerance,
    flatness_margin,
    seed,
    out,
    as_json,
):
    """Realise a chosen passband as active stages on standard values: parts, their noise, the yield.

    Example: audiobw realise out/ensemble-48k-stereo   or   audiobw realise --band 20:15k --order 4 --out r/
    """
    from .. import units
    from ..errors import ParameterError
    from ..filters import FilterSpec, validate_spec
    from ..realise.build import realise
    from ..realise.folder import finish, realise_folder
    from ..realise.text import stage_lines, summary_lines

    r_level = units.parse_quantity(impedance, "resistance", name="--impedance")
    if not 100.0 <= r_level <= 1e6:
        raise ParameterError(f"--impedance: {impedance!r} is out of range; accepted: 100 Ω to 1 MΩ")
    if opamp_class:
        en, i_n = OPAMP_CLASSES[opamp_class]
    else:
        en = units.parse_quantity(opamp_en, "voltage_density", name="--opamp-en")
        i_n = units.parse_quantity(opamp_in, "current_density", name="--opamp-in")
    tk = units.parse_quantity(temperature, "temperature", name="--temperature")
    tol_r = units.parse_quantity(tolerance_r, "fraction", name="--tolerance-r")
    tol_c = units.parse_quantity(tolerance_c, "fraction", name="--tolerance-c")
    if tol_r >= 0.5 or tol_c >= 0.5:
        raise ParameterError("--tolerance-r/--tolerance-c: accepted: below 50 %")
    edge_tol = units.parse_quantity(edge_tolerance, "fraction", name="--edge-tolerance")
    flat_margin = units.parse_quantity(flatness_margin, "db", name="--flatness-margin")
    if flat_margin < 0:
        raise ParameterError(f"--flatness-margin: {flatness_margin!r} is negative; accepted: 0 dB or more")
    options = dict(
        topology=topology,
        r_series=r_series.upper(),
        c_series=c_series.upper(),
        r_level=r_level,
        en_v_hz=en,
        in_a_hz=i_n,
        temperature_k=tk,
        tol_r=tol_r,
        tol_c=tol_c,
        draws=draws,
        seed=seed,
        edge_tol=edge_tol,
        flat_margin_db=flat_margin,
    )
    if folder is not None:
        if band is not None:
            raise ParameterError("realise: give DIR or --band, not both")
        result, target = realise_folder(folder, case_id=case_id, out=out, **options)
    else:
        if band is None:
            raise ParameterError("realise: give DIR (a sweep folder) or --band LOW:HIGH")
        if out is None:
            raise ParameterError("--out: required with --band; accepted: an output folder")
        lo, hi = units.parse_band(band, name="--band")
        response = "bandpass" if lo and hi else ("lowpass" if hi else "highpass")
        spec = FilterSpec(response, family, order, lo, hi, float(units.parse_quantity(ripple, "db", name="--ripple")))
        validate_spec(spec, fs_hz=4 * max(x for x in (lo, hi) if x), name="--band")
        result = realise(spec, **options)
        target = finish(result, Path(out), spec.label())
    text = json.dumps(result, indent=2, allow_nan=False)
    if as_json:
        click.echo(text)
        return
    click.echo(f"Realising {result['source']}")
    click.echo("\n".join(stage_lines(result)))
    click.echo("\n".join(summary_lines(result)))
    click.echo(f"Wrote {target} and {target.parent / 'realise-band.png'}.")

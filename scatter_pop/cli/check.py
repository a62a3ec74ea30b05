"""``scatter-pop check SPEC``: validate a spec and print what it resolves to."""

from __future__ import annotations

import json
from dataclasses import asdict

from scatter_pop.cli.options import add_format_arguments
from scatter_pop.constants import MJUP_MSUN, R_JUP_AU, R_SUN_AU
from scatter_pop.spec.reader import load_spec

__all__ = ["configure", "execute"]


def configure(parser) -> None:
    parser.add_argument("spec", metavar="SPEC", help="ensemble spec (TOML)")
    add_format_arguments(parser, ("text", "json"))


def execute(args) -> int:
    spec = load_spec(args.spec)
    # what `run SPEC` would refuse before computing, refused here too: the walltime of a batch
    # cluster against the longest batch (read-only look at the default run folder)
    from scatter_pop.spec.cluster_table import BATCH

    if spec.cluster.kind in BATCH:
        from scatter_pop.ensemble.driver import EnsembleRun, default_out

        EnsembleRun(spec, default_out(spec), log=lambda *_: None).check_cluster()
    if args.format == "json":
        doc = asdict(spec)
        doc.pop("text", None)
        print(json.dumps(doc, indent=2, default=repr))
        return 0
    p, i = spec.planets, spec.integration
    print(f"spec {spec.source}: valid")
    print(f"  run        {spec.run.name!r}, seed {spec.run.seed}, {spec.run.systems} systems")
    print(f"  star       {spec.star.mass:g} M_sun, {spec.star.radius / R_SUN_AU:g} R_sun")
    masses = ", ".join(
        f"{d.kind} {d.low / MJUP_MSUN:g}" + (f"-{d.high / MJUP_MSUN:g}" if d.kind != "fixed" else "") for d in p.masses
    )
    print(f"  planets    {p.count}; masses [M_J]: {masses}")
    if p.a_list is not None:
        print(f"             a = {', '.join(f'{a:g}' for a in p.a_list)} AU")
    else:
        sp = p.spacing
        width = f"{sp.low:g}" if sp.kind == "fixed" else f"{sp.low:g}-{sp.high:g}"
        print(f"             a_inner {p.a_inner:g} AU, spacing {width} mutual Hill radii")
    size = f"radius {p.radius / R_JUP_AU:g} R_J" if p.radius is not None else "radius from bulk density"
    print(f"             e Rayleigh sigma {p.e_sigma:g}; inclination sigma {p.inc_sigma:g} rad; {size}")
    end = f"{i.end_time:g} yr" if i.end_time is not None else f"{i.end_orbits:g} inner orbits"
    print(f"  integrate  {i.integrator}, to {end}, stop when settled: {i.stop_when_settled}")
    print(f"  identity   {spec.digest()[:16]}")
    return 0

"""Behaviour fingerprint: hashes of what the pipeline computes, to show a refactor changed nothing.

    .venv/bin/python analysis/fingerprint.py OUT_DIR            # writes OUT_DIR/fingerprint.json
    .venv/bin/python analysis/fingerprint.py OUT_DIR --against OLD/fingerprint.json
    .venv/bin/python analysis/fingerprint.py OUT_DIR --integrator bs   # where a spec leaves the default

Runs (in OUT_DIR) the ensemble of ``tests/data/tiny.toml`` and of ``runs/demo.toml`` cut to 24 systems,
the demo's comparison and verdict on the cut ensemble, and hashes every physics variable of each
``ensemble.nc`` (the raw bytes of the array, its dtype and shape), plus ``comparison.json`` and
``verdict.json`` with their volatile fields (paths, versions, timings) removed.  ``--against`` prints
the names whose hash differs and exits 1 if any does.
"""

from __future__ import annotations

import argparse
import hashlib
import json
import re
import sys
from pathlib import Path

import xarray as xr

ROOT = Path(__file__).resolve().parent.parent
VOLATILE = {
    "sources",
    "source",
    "path",
    "paths",
    "created",
    "version",
    "scatter_pop_version",
    "rebound_version",
    "heyoka_version",
    "history",
    "wall_seconds",
    "cpu_seconds",
}


def _physics_names(ds):
    try:
        from scatter_pop.store.schema import PHYSICS_VARIABLES
    except ImportError:  # the flat layout before the subpackages
        from scatter_pop.schema import PHYSICS_VARIABLES
    return [n for n in PHYSICS_VARIABLES if n in ds]


def _hash_array(values) -> str:
    h = hashlib.sha256()
    h.update(str(values.dtype).encode())
    h.update(str(values.shape).encode())
    h.update(values.tobytes())
    return h.hexdigest()[:20]


def _scrub(obj):
    if isinstance(obj, dict):
        return {k: _scrub(v) for k, v in sorted(obj.items()) if k not in VOLATILE}
    if isinstance(obj, list):
        return [_scrub(v) for v in obj]
    return obj


def _hash_json(path) -> str:
    doc = _scrub(json.loads(Path(path).read_text()))
    return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()[:20]


def _with_integrator(text: str, integrator: str | None) -> str:
    """The spec text with ``integration.integrator = integrator`` where it leaves the default (a spec
    naming its integrator, like tiny.toml's ias15, is kept as it is; None: unchanged)."""
    if integrator is None or re.search(r"(?m)^integrator\s*=", text):
        return text
    return re.sub(r"(?m)^\[integration\]\n", f'[integration]\nintegrator = "{integrator}"\n', text)


def fingerprint(out: Path, integrator: str | None = None) -> dict:
    import scatter_pop as sp

    out.mkdir(parents=True, exist_ok=True)
    result = {}
    # tiny.toml as it is (or on the integrator asked for)
    tiny_text = _with_integrator((ROOT / "tests" / "data" / "tiny.toml").read_text(), integrator)
    tiny = sp.parse_spec(tiny_text, str(ROOT / "tests" / "data" / "tiny.toml"))
    ds = sp.run_ensemble(tiny, out=out / "tiny", workers=1, log=lambda *_: None)
    for name in _physics_names(ds):
        result[f"tiny/{name}"] = _hash_array(ds[name].values)
    # the demo spec cut to 24 systems, with the demo's comparison and verdict
    text = (ROOT / "runs" / "demo.toml").read_text()
    text = _with_integrator(re.sub(r"(?m)^systems\s*=\s*\d+", "systems = 24", text), integrator)
    spec_path = out / "demo24.toml"
    spec_path.write_text(text)
    (out / "demo24_target.toml").write_text((ROOT / "runs" / "demo_target.toml").read_text())
    try:
        from scatter_pop.demo import run_demo
    except ImportError:
        from scatter_pop.cli.demo import run_demo
    paths = run_demo(
        spec_path, out / "demo24", workers=1, formats=("png",), permutations=500, spread_draws=20, log=lambda *_: None
    )
    ds = xr.open_dataset(paths["ensemble"], mask_and_scale=False)  # codes as stored
    for name in _physics_names(ds):
        result[f"demo24/{name}"] = _hash_array(ds[name].values)
    ds.close()
    result["demo24/comparison.json"] = _hash_json(paths["comparison_json"])
    result["demo24/verdict.json"] = _hash_json(paths["verdict_json"])
    return result


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--against", type=Path)
    parser.add_argument("--integrator", default=None, help="integration.integrator where a spec leaves the default")
    args = parser.parse_args(argv)
    result = fingerprint(args.out, args.integrator)
    (args.out / "fingerprint.json").write_text(json.dumps(result, indent=1, sort_keys=True) + "\n")
    print(f"{len(result)} hashes written to {args.out / 'fingerprint.json'}")
    if args.against:
        old = json.loads(args.against.read_text())
        differ = sorted(k for k in set(old) | set(result) if old.get(k) != result.get(k))
        for k in differ:
            print(f"differs: {k}")
        print("identical" if not differ else f"{len(differ)} of {len(set(old) | set(result))} differ")
        return 1 if differ else 0
    return 0


if __name__ == "__main__":
    sys.exit(main())

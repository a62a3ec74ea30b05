"""The benchmark's summary: each integration path against the IAS15 reference (speed ratio, energy
errors, two-sample KS and Anderson-Darling of final e and a, branching ratios in binomial errors),
and its table.  Pure: the records of :mod:`scatter_pop.ensemble.bench` in, numbers out.
"""

from __future__ import annotations

import numpy as np

__all__ = ["summarize", "format_table"]


def _finals(records, n_planets: int):
    """(e_final, a_final) of surviving planets in quality-selected systems, and fate fractions."""
    from scatter_pop.engine.outcome import Fate
    from scatter_pop.store.schema import quality_mask, records_to_dataset, survivor_mask

    ds = records_to_dataset(list(records), n_planets)
    keep = survivor_mask(ds).values
    fate = ds["fate"].values[quality_mask(ds).values]
    counts = {f.word: int(np.sum(fate == int(f))) for f in Fate}
    total = max(1, sum(counts.values()))
    return (
        ds["e_final"].values[keep],
        ds["a_final"].values[keep],
        {k: v / total for k, v in counts.items()},
        int(quality_mask(ds).values.sum()),
    )


def summarize(spec, results: dict, permutations: int = 2000, seed: int = 1) -> dict:
    """Per-path numbers: throughput, ratio to the reference, energy errors, branching, p-values."""
    from scatter_pop.store.schema import ENERGY_TOLERANCE_DEFAULT
    from scatter_pop.survey.statistics import two_sample

    n_planets = spec.planets.count
    ref = results["reference"]
    ref_cpu = sum(c for _, c, _ in ref)
    e_ref, a_ref, _, _ = _finals([r for r, _, _ in ref], n_planets)
    out = {}
    for label, rows in results.items():
        records = [r for r, _, _ in rows]
        cpu = np.array([c for _, c, _ in rows])
        err = np.abs(np.array([r.energy_error for r in records]))
        e_fin, a_fin, fates, kept = _finals(records, n_planets)
        reasons = {}
        for r in records:
            reasons[r.end_reason.word] = reasons.get(r.end_reason.word, 0) + 1
        entry = {
            "systems": len(rows),
            "cpu_seconds": float(cpu.sum()),
            "cpu_median": float(np.median(cpu)),
            "systems_per_cpu_second": len(rows) / float(cpu.sum()),
            "speedup": ref_cpu / float(cpu.sum()),
            "energy_error_median": float(np.nanmedian(err)),
            "energy_error_max": float(np.nanmax(err)),
            "above_tolerance": int(np.sum(~(err <= ENERGY_TOLERANCE_DEFAULT))),
            "kept": kept,
            "fates": fates,
            "end_reasons": reasons,
            "survivors": int(e_fin.size),
            "worker_peak_rss_mb": float(max(m for _, _, m in rows)),
        }
        if label != "reference" and e_fin.size >= 2 and e_ref.size >= 2:
            rng = np.random.default_rng(seed)
            te = two_sample(e_fin, e_ref, permutations=permutations, rng=rng)
            ta = two_sample(a_fin, a_ref, permutations=permutations, rng=rng)
            entry.update(ks_e=te.ks_pvalue, ad_e=te.ad_pvalue, ks_a=ta.ks_pvalue, ad_a=ta.ad_pvalue)
        out[label] = entry
    return out


def format_table(summary: dict) -> str:
    """A plain-text table of the summary (one line per path)."""
    head = (
        f"{'path':<10} {'integrator':<10} {'sys/CPU-s':>9} {'x ref':>6} {'med |dE/E|':>10} "
        f"{'max |dE/E|':>10} {'ejected':>7} {'merged':>6} {'star':>5} {'KS e':>6} {'AD e':>6} "
        f"{'KS a':>6} {'AD a':>6} {'peak MB':>7}"
    )
    lines = [head, "-" * len(head)]
    for label, s in summary.items():
        f = s["fates"]
        p = [s.get(k) for k in ("ks_e", "ad_e", "ks_a", "ad_a")]
        ps = " ".join(f"{v:6.3f}" if v is not None else f"{'-':>6}" for v in p)
        lines.append(
            f"{label:<10} {s.get('integrator', ''):<10} {s['systems_per_cpu_second']:9.3f} "
            f"{s['speedup']:6.2f} {s['energy_error_median']:10.1e} {s['energy_error_max']:10.1e} "
            f"{f['ejected']:7.3f} {f['merged']:6.3f} {f['hit_star'] + f['tidally_disrupted']:5.3f} {ps} "
            f"{s['worker_peak_rss_mb']:7.0f}"
        )
    return "\n".join(lines)


# --------------------------------------------------------------------------- parallel efficiency

"""A judgement in words and as JSON: the verdict, its numbers and its caveats.

Rendering only: every number comes from :class:`scatter_pop.target.judgement.Judgement`.
Masses are shown in M_J (converted here, at the edge); JSON keeps the
package units (AU, yr, M_sun) and says so in its ``units`` entry.

The words for a rate are this program's convention, not a published scale:
at least 10 % of systems — "a common outcome"; 1–10 % — "an uncommon but
regular outcome"; below 1 % — "a rare outcome"; no match — the exact upper
limit.  A rate word is used only when the whole interval lies in its band;
otherwise the verdict says which rates the interval excludes and which it does not.
The headline counts only systems whose outcome is final or likely so (settled +
likely stable); "can produce" is said only when a settled system made such a planet.
Numbers are shown to the precision their interval supports (two significant figures
of the interval's width), never finer than 0.001 %.
"""

from __future__ import annotations

import dataclasses
import json
import math

from scatter_pop.constants import MJUP_MSUN
from scatter_pop.target.judgement import EnsembleJudgement, Judgement
from scatter_pop.target.pathways import MIN_SAMPLE

__all__ = [
    "rate_words",
    "interval_words",
    "verdict_sentences",
    "verdict_sentence",
    "caveats",
    "render_text",
    "to_dict",
    "render_json",
]


FLOOR = 1e-5  # fractions below this are shown as "< 0.001 %"
RATE_BANDS = ((0.10, "a common outcome"), (0.01, "an uncommon but regular outcome"), (0.0, "a rare outcome"))
_BAND_NAMES = {
    "a common outcome": "common range (10 % and more)",
    "an uncommon but regular outcome": "uncommon-but-regular range (1 % to 10 %)",
    "a rare outcome": "rare range (below 1 %)",
}


def _pct(x: float, width: float | None = None) -> str:
    """A fraction in per cent: two significant figures of ``width`` (an interval's width) when
    given, else of ``x`` itself; below :data:`FLOOR` "< 0.001 %"."""
    if x is None or not math.isfinite(x):
        return "n/a"
    if x == 0:
        return "0 %"
    if x < FLOOR:
        return "< 0.001 %"
    scale = width if width is not None and math.isfinite(width) and width > 0 else x
    decimals = max(0, 1 - math.floor(math.log10(100 * scale)))
    text = f"{100 * x:.{decimals}f}"
    if float(text) == 0:  # the width asks for fewer digits than the value needs to be seen
        text = f"{100 * x:.2g}"
    return f"{text} %"


def _count(x: float) -> str:
    """An expected number of matches: two significant figures, "< 0.001" below that."""
    return "0" if x == 0 else ("< 0.001" if x < 1e-3 else f"{x:.2g}")


def _num(x: float, unit: str = "") -> str:
    if x is None or not math.isfinite(x):
        return "n/a"
    text = f"{x:.3g}"
    return f"{text} {unit}".rstrip()


def rate_words(fraction: float) -> str:
    """The program's words for a rate (see the module docstring)."""
    for low, words in RATE_BANDS:
        if fraction >= low:
            return words
    return RATE_BANDS[-1][1]


def interval_words(low: float, high: float) -> str | None:
    """The rate words that the whole interval [low, high] supports, or None when its ends fall in
    different bands."""
    a, b = rate_words(low), rate_words(high)
    return a if a == b else None


def _interval(p) -> str:
    width = p.high - p.low
    return (
        f"{_pct(p.fraction, width)} ({100 * p.confidence:g} % {p.method_name} interval {_pct(p.low)} to {_pct(p.high)})"
    )


def describe_target(j: Judgement) -> list[str]:
    t, w = j.target, j.windows
    mass_word = "m" if t.true_mass else "m sin i"
    star = f", M* = {t.mstar:g} M_sun" if t.mstar is not None else ""
    a_lo, a_hi = w.a_range(t)
    m_lo, m_hi = w.msini_range(t)
    projection = (
        "true masses compared (target mass is a true mass)"
        if t.true_mass
        else f"simulated m sin i = m x sin i with one isotropic draw of sin i per planet, seed {j.seed}"
    )
    return [
        f"Target {t.name}: e = {t.e:g} ± {t.e_err:g}, a = {t.a:g} ± {t.a_err:g} AU, "
        f"{mass_word} = {t.msini / MJUP_MSUN:.3g} ± {t.msini_err / MJUP_MSUN:.3g} M_J{star}",
        f"A surviving planet counts as like it when e >= {w.e_min(t):.3g}, {a_lo:.3g} <= a <= "
        f"{a_hi:.3g} AU and {m_lo / MJUP_MSUN:.3g} <= {mass_word} <= {m_hi / MJUP_MSUN:.3g} M_J",
        f"({projection}).",
    ]


def verdict_sentences(r: EnsembleJudgement, j: Judgement) -> list[str]:
    """The verdict as plain sentences, each no stronger than its interval (module docstring)."""
    name, p = j.target.name, r.systems
    conf = f"{100 * p.confidence:g} %"
    n_u, k_u = r.by_class["unsettled"].n, r.by_class["unsettled"].k
    snapshots = (
        f"{k_u} of the {n_u} unsettled systems {'shows' if k_u == 1 else 'show'} such a planet at the end "
        f"time, but {'it is a snapshot' if k_u == 1 else 'they are snapshots'} that may still change and "
        f"{'is' if k_u == 1 else 'are'} not counted."
        if k_u
        else None
    )
    if r.n_systems == 0:
        return [f"No system of this ensemble entered the statistics: nothing can be said about {name}."]
    if p.n == 0:
        out = [
            f"None of the {r.n_systems} systems used reached a final or likely-stable outcome: all are "
            f"snapshots at the end time, so nothing can be said yet about how often scattering makes "
            f"a planet like {name}; raise the end time to carry them further."
        ]
        return out + ([snapshots] if snapshots else [])
    if p.k == 0:
        r3 = f"; rule of three: 3/N = {_pct(p.rule_of_three)}" if p.rule_of_three is not None else ""
        out = [
            f"None of the {p.n} settled or likely-stable systems made a planet like {name}.",
            f"At {conf} confidence such systems make one in fewer than {_pct(p.upper_limit)} of cases "
            f"(exact one-sided binomial upper limit, 1 - {1 - p.confidence:g}^(1/N){r3}); rates below "
            f"that are not excluded.",
            "That is a limit, not a verdict against scattering: other initial conditions or a larger "
            "ensemble may do better.",
        ]
        return out + ([snapshots] if snapshots else [])
    out = [
        f"Scattering in this ensemble left a planet like {name} in {p.k} of {p.n} settled or "
        f"likely-stable systems: {_interval(p)}."
    ]
    words = interval_words(p.low, p.high)
    if words is not None:
        out.append(f"The whole interval lies in one band: such a planet is {words} of these initial conditions.")
    else:
        out.append(
            f"The interval reaches from the {_BAND_NAMES[rate_words(p.low)]} into the "
            f"{_BAND_NAMES[rate_words(p.high)]}, so no single rate word fits: the data exclude rates below "
            f"{_pct(p.low)} and above {_pct(p.high)}, and nothing more."
        )
    if r.settled_matches:
        which = (
            "the matching system is settled"
            if p.k == 1
            else f"{r.settled_matches} of the {p.k} matching systems are settled"
        )
        out.append(
            f"So scattering can produce such a planet from these initial conditions: {which}, an outcome "
            f"that cannot change."
        )
    else:
        out.append(
            "All matching systems are likely-stable pairs (Petrovich 2015 criterion), none settled: "
            "scattering may produce such a planet, but no outcome shown here is certain to last."
        )
    return out + ([snapshots] if snapshots else [])


def verdict_sentence(r: EnsembleJudgement, j: Judgement) -> str:
    """The verdict sentences of :func:`verdict_sentences` as one paragraph."""
    return " ".join(verdict_sentences(r, j))


def caveats(r: EnsembleJudgement, j: Judgement) -> list[str]:
    """The caveats that apply to this ensemble's numbers."""
    t, w = j.target, j.windows
    out = [
        f"Finite sample: the intervals count only the sampling noise of {r.n_systems} systems; they "
        f"say nothing about whether the initial conditions (masses, spacings, planet count) are "
        f"those of real systems, nor about how common such systems are."
    ]
    cuts = (
        "Cuts: the answer depends on the windows (a_window, a_factor, msini_window, msini_factor, "
        "e_window of the target file); the likelihood-weighted fraction uses the uncertainties instead."
    )
    ex = r.excluded
    if sum(ex.values()):
        cuts += (
            f" {sum(ex.values())} of {r.n_total} systems were left out ({ex['failed']} failed, "
            f"{ex['capped']} stopped by the wall-clock cap, {ex['energy']} with |dE/E| > "
            f"{j.quality.energy_tolerance:g})."
        )
        if ex["capped"]:
            cuts += " Capped systems are the long-lived ones: leaving them out can bias the fractions."
    out.append(cuts)
    a_lo, a_hi = w.a_range(t)
    s_lo, s_hi = r.a_survivors
    if not math.isfinite(s_lo):
        out.append("No bound survivors in the systems used: nothing to compare with.")
    elif not (s_hi >= a_lo and s_lo <= a_hi):
        out.append(
            f"Scaling: no survivor lies in the a window (survivors span {_num(s_lo)} to "
            f"{_num(s_hi, 'AU')}). Point-mass gravity is scale-free (a -> λa, t -> λ^1.5 t), "
            f"but collisions between planets, with the star and tidal disruption are not: "
            f"run an ensemble placed at the target's separation rather than rescaling."
        )
    if t.mstar is not None and math.isfinite(r.mass_scale) and abs(r.mass_scale - 1.0) < 1e-9:
        out.append("Scaling: the target's star has the ensemble's mass; masses compared as simulated.")
    elif t.mstar is not None:
        factor = f"= {r.mass_scale:.3g} " if math.isfinite(r.mass_scale) else "(per ensemble) "
        out.append(
            f"Scaling: simulated masses were multiplied by M*_target / M*_ensemble {factor}to keep "
            f"the planet-to-star mass ratios; the orbits were not rescaled."
        )
    else:
        star = f"a {r.star_mass:g} M_sun star" if r.star_mass is not None else "their ensembles' stars"
        out.append(f"Scaling: the target's star_mass not given; masses compared as simulated around {star}.")
    if not t.true_mass:
        out.append(
            f"Projection: the counts use one random draw of sin i per planet (seed {j.seed}); "
            f"the likelihood-weighted fractions average over orientations instead."
        )
    if r.n_unsettled:
        text = (
            f"Unfinished: {r.n_unsettled} of the {r.n_systems} systems used are unsettled — stopped at the end "
            f"time ({_num(r.t_end_max, 'yr')}) with orbits that may still change; they are left out of the "
            f"headline. A pair that started Hill unstable can never become Hill stable (its energy and angular "
            f"momentum are conserved): it settles only by losing a planet, so raise the end time to carry them "
            f"further"
        )
        if r.pathways.unsettled_matching:
            k = r.pathways.unsettled_matching
            text += f" ({k} of them {'shows' if k == 1 else 'show'} a planet like {t.name} at the end time)"
        out.append(text + ".")
    if r.pathways.tidal_candidates:
        out.append(
            f"Tides: {r.pathways.tidal_candidates} of the {r.pathways.n_planets} matching planets "
            f"have pericentres below the circularisation threshold; tides may shrink and "
            f"circularise their orbits, after which they would no longer look like {t.name}."
        )
    out.append(
        "Measurement: least-squares RV fits overestimate e at low signal-to-noise (Shen & Turner "
        "2008, ApJ 685, 553; Zakamska, Pan & Ford 2011, MNRAS 410, 1895); if the target's K/σ is "
        "low its true e may be lower than measured."
    )
    return out


def _spread(sp, unit: str) -> str:
    """Median and 16-84 % range, or the values themselves when there are too few for percentiles."""
    if sp.n == 0:
        return "none"
    if sp.n < MIN_SAMPLE:
        return f"median {_num(sp.median, unit)} (too few for percentiles, n = {sp.n})"
    return f"median {_num(sp.median, unit)} (16-84 %: {_num(sp.p16)} to {_num(sp.p84, unit)}, n = {sp.n})"


def _ensemble_lines(r: EnsembleJudgement, j: Judgement) -> list[str]:
    p, s, ws, wv = r.systems, r.survivors, r.weighted_systems, r.weighted_survivors
    pw, conf = r.pathways, f"{100 * j.confidence:g} %"
    ex = r.excluded
    lines = [
        f"== {r.label} ==",
        f"systems: {r.n_total} in the file, {r.n_systems} used, {sum(ex.values())} left out "
        f"({ex['failed']} failed, {ex['capped']} capped, {ex['energy']} energy error); "
        f"{r.n_survivors} surviving planets",
        "like the target (headline: systems whose outcome is settled or likely stable):",
    ]
    for word, q in (("systems", p), ("survivors", s)):
        extra = f"; {conf} one-sided upper limit {_pct(q.upper_limit)}" if q.k == 0 and q.n else ""
        lines.append(
            f"  {word:<10}{q.k:>6} / {q.n:<6} = {_pct(q.fraction, q.high - q.low):>8}   {conf} {q.method_name} "
            f"interval {_pct(q.low)} to {_pct(q.high)}{extra}"
        )
    lines.append("by settlement class (systems like the target / systems of the class):")
    for word, q in r.by_class.items():
        if q.n:
            lines.append(f"  {word:<14}{q.k:>6} / {q.n:<6} {_interval(q)}")
        else:
            lines.append(f"  {word:<14}     0 / 0")
    u = r.with_unsettled
    lines.append(
        f"upper-bound line, snapshots counted as if final: {u.k} / {u.n} systems, {_interval(u)}"
        + (" — not an outcome rate" if r.by_class["unsettled"].k else "")
    )
    lines.append("likelihood-weighted over settled + likely-stable systems (uncertainties instead of windows):")
    for word, q in (("systems", ws), ("survivors", wv)):
        width = q.high - q.low if q.resamples else None
        lines.append(
            f"  {word:<10}{_pct(q.value, width):>17}   bootstrap {conf}: {_pct(q.low)} to "
            f"{_pct(q.high)}; expected matches {_count(q.expected)}"
        )
    lines.append("verdict: " + verdict_sentence(r, j))
    if pw.n_matching == 0:
        lines.append("pathways and starting configurations: no matching system to describe.")
        lines.append("caveats:")
        return lines + [f"  - {c}" for c in caveats(r, j)]
    lines.append(f"pathways of the {pw.n_matching} matching systems [all {pw.n_all} systems]:")
    lm, la = pw.lost_matching, pw.lost_all
    lines.append(
        f"  other planets: {lm['ejected']} ejected, {lm['merged']} merged, {lm['star']} lost to "
        f"the star [{la['ejected']}, {la['merged']}, {la['star']}]"
    )
    lines.append("  branch: " + ", ".join(f"{b} {k} [{n}]" for b, k, n in pw.branches))
    lines.append("  survivors left: " + ", ".join(f"{n_left}: {k} [{n}]" for n_left, k, n in pw.survivors_left))
    im, ia = pw.instability_matching, pw.instability_all
    lines.append(f"  instability began (first close encounter): {_spread(im, 'yr')} [all: {_spread(ia, 'yr')}]")
    lines.append(
        f"  tidal-circularisation candidates: {pw.tidal_candidates} of {pw.n_planets} matching "
        f"planets; their pericentres: {_spread(pw.pericentre, 'AU')}"
    )
    lines.append("starting configurations, matching systems vs the others:")
    for c in r.configurations:
        unit = f" {c.unit}" if c.unit else ""
        if c.too_few:
            lines.append(
                f"  {c.quantity}: too few to compare (n = {c.n_matching} vs {c.n_rest}; "
                f"at least {MIN_SAMPLE} each are needed)"
            )
            continue
        lines.append(
            f"  {c.quantity}: median {_num(c.median_matching)}{unit} vs {_num(c.median_all)}{unit}"
            f" over all; Cliff's delta {c.cliffs_delta:.2f}, KS p = {c.ks_pvalue:.2g} "
            f"(n = {c.n_matching} vs {c.n_rest})"
        )
    lines.append("caveats:")
    lines += [f"  - {c}" for c in caveats(r, j)]
    return lines


def render_text(j: Judgement) -> str:
    """The whole judgement as plain text (one block per ensemble)."""
    lines = describe_target(j)
    for r in j.ensembles + ((j.pooled,) if j.pooled is not None else ()):
        lines.append("")
        lines += _ensemble_lines(r, j)
    if j.pooled is not None:
        lines += [
            "",
            "(The pooled block mixes the ensembles in proportion to their sizes; it is a "
            "comparison aid for the planet count, not a population model.)",
        ]
    return "\n".join(lines) + "\n"


def _clean(x):
    if isinstance(x, float):
        return x if math.isfinite(x) else None
    if isinstance(x, dict):
        return {str(k): _clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    return x


def to_dict(j: Judgement) -> dict:
    """The judgement as plain JSON-ready values (NaN -> None), with verdicts and caveats."""
    doc = dataclasses.asdict(j)  # "quality": energy_tolerance and include_capped
    doc["energy_tolerance"] = j.quality.energy_tolerance  # where verdict.json had it before QualityCuts
    doc["units"] = {
        "a": "au",
        "msini": "Msun",
        "mstar": "Msun",
        "t": "yr",
        "fractions": "1",
        "instability": "yr",
        "pericentre": "au",
    }
    t = j.target
    doc["target"]["msini_mjup"] = t.msini / MJUP_MSUN
    doc["target"]["msini_err_mjup"] = t.msini_err / MJUP_MSUN
    a_lo, a_hi = j.windows.a_range(t)
    m_lo, m_hi = j.windows.msini_range(t)
    doc["windows"].update({"e_min": j.windows.e_min(t), "a_range": [a_lo, a_hi], "msini_range": [m_lo, m_hi]})
    blocks = list(j.ensembles) + ([j.pooled] if j.pooled is not None else [])
    docs = list(doc["ensembles"]) + ([doc["pooled"]] if j.pooled is not None else [])
    for r, d in zip(blocks, docs):
        d["verdict"] = verdict_sentence(r, j)
        d["verdict_sentences"] = verdict_sentences(r, j)
        d["caveats"] = caveats(r, j)
    return _clean(doc)


def render_json(j: Judgement) -> str:
    """:func:`to_dict` as indented JSON text."""
    return json.dumps(to_dict(j), indent=2) + "\n"

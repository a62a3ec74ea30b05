"""The verdict never says more than its interval: hand-made ensembles with 0, 1, a few and many
matching systems, settled, likely stable and unsettled.

Every sentence is checked against the interval it rests on: the Clopper–Pearson interval
(Clopper & Pearson 1934, Biometrika 26, 404; scipy.stats.binomtest) of the settled + likely-stable
systems; a rate word only when both ends of that interval fall in its band (the bands are this
program's convention: below 1 %, 1–10 %, 10 % and more); "can produce" only with a settled match;
KS p-values, Cliff's delta and percentiles only with at least 5 values a side (common practice:
fewer values do not support them).
"""

from __future__ import annotations

import math
import re

import pytest
import scipy.stats
from records import dataset, planet, system

from scatter_pop.engine.outcome import EndReason, Fate, Settlement
from scatter_pop.target.judgement import judge
from scatter_pop.target.planet import target_from_flags
from scatter_pop.target.verdict import RATE_BANDS, _pct, interval_words, render_text, verdict_sentences

TARGET = target_from_flags(e=0.9, e_err=0.02, a=9.0, a_err=1.5, msini=5.0, msini_err=0.5, true_mass=True)
BANDS = {words: low for low, words in RATE_BANDS}


def _lost():
    return planet(1.0, -20.0, 1.3, a_initial=6.5, fate=Fate.EJECTED)


def _settled(i, match):
    e = 0.95 if match else 0.3
    return system(i, [planet(5.0, 9.0, e, a_initial=5.0), _lost()], reason=EndReason.ONE_PLANET)


def _likely(i, match):
    # two planets far apart (a_out/a_in = 3 > Petrovich's boundary), quiet recent past
    e = 0.95 if match else 0.3  # even at e = 0.95 the orbits stay apart: q_out = 57 AU > Q_in = 17.6 AU
    planets = [planet(5.0, 9.0, e, a_initial=5.0), planet(1.0, 60.0, 0.05, a_initial=6.5)]
    return system(i, planets, reason=EndReason.END_TIME, hill_ratio=0.9, recent_gap=20.0)


def _unsettled(i, match):
    e = 0.95 if match else 0.3
    planets = [planet(5.0, 9.0, e, a_initial=5.0), planet(1.0, 11.0, 0.4, a_initial=6.5)]
    return system(i, planets, reason=EndReason.END_TIME, hill_ratio=0.9, recent_gap=math.nan)


def _ensemble(settled_k, settled_n, unsettled_k=0, unsettled_n=0, likely_k=0, likely_n=0):
    recs, i = [], 0
    for maker, k, n in (
        (_settled, settled_k, settled_n),
        (_likely, likely_k, likely_n),
        (_unsettled, unsettled_k, unsettled_n),
    ):
        for j in range(n):
            recs.append(maker(i, j < k))
            i += 1
    return dataset(recs, 2)


def _cp(k, n):
    ci = scipy.stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method="exact")
    return ci.low, ci.high


def _check_sentences(sentences, k, n, settled_k):
    """Every sentence against the interval of k of n."""
    low, high = _cp(k, n) if n else (math.nan, math.nan)
    text = " ".join(sentences)
    for words, band_low in BANDS.items():
        if words in text:
            band_high = min([b for b in BANDS.values() if b > band_low], default=1.0 + 1e-12)
            assert band_low <= low and high < band_high or (high == 1.0 and band_low == 0.10), (words, low, high)
            assert interval_words(low, high) == words
    assert ("can produce" in text) == (settled_k > 0)
    if k and n:
        assert f"{k} of {n} settled or likely-stable systems" in text
        assert f"interval {_pct(low)} to {_pct(high)}" in text
    return text


@pytest.mark.parametrize(
    "settled_k, settled_n, unsettled_k, unsettled_n",
    [
        (0, 200, 0, 40),  # none
        (0, 200, 3, 40),  # none among the final ones, some snapshots
        (1, 240, 0, 0),  # one: the interval spans rare to regular
        (3, 60, 2, 30),  # a few
        (60, 200, 10, 40),  # many: the whole interval is common
        (40, 4000, 0, 0),  # 1 %: spans two bands, no rate word
    ],
)
def test_each_sentence_follows_its_interval(settled_k, settled_n, unsettled_k, unsettled_n):
    r = judge(_ensemble(settled_k, settled_n, unsettled_k, unsettled_n), TARGET).ensembles[0]
    j = judge(_ensemble(settled_k, settled_n, unsettled_k, unsettled_n), TARGET)
    assert (r.systems.k, r.systems.n) == (settled_k, settled_n)  # the headline: final systems only
    assert (r.by_class["unsettled"].k, r.by_class["unsettled"].n) == (unsettled_k, unsettled_n)
    assert (r.with_unsettled.k, r.with_unsettled.n) == (settled_k + unsettled_k, settled_n + unsettled_n)
    sentences = verdict_sentences(r, j)
    text = _check_sentences(sentences, settled_k, settled_n, settled_k)
    if unsettled_k:
        assert f"{unsettled_k} of the {unsettled_n} unsettled systems show" in text and "not counted" in text
    if settled_k == 0:
        assert "fewer than" in text and "not excluded" in text
    if settled_k == 1:  # 1 of 240: the interval runs from 0.011 % to 2.3 %
        assert interval_words(*_cp(1, 240)) is None and "rare outcome" not in text
        assert "reaches from the rare range (below 1 %) into the uncommon-but-regular range" in text
    if settled_k == 60:
        assert "a common outcome" in text


def test_matches_only_in_likely_stable_pairs_do_not_say_can_produce():
    ds = _ensemble(0, 50, likely_k=4, likely_n=10)
    assert sorted(set(ds["settlement"].values.tolist())) == [int(Settlement.SETTLED), int(Settlement.LIKELY_STABLE)]
    j = judge(ds, TARGET)
    r = j.ensembles[0]
    assert (r.systems.k, r.systems.n, r.settled_matches) == (4, 60, 0)
    text = _check_sentences(verdict_sentences(r, j), 4, 60, 0)
    assert "likely-stable pairs" in text


def test_no_final_system_says_nothing_can_be_said_yet():
    j = judge(_ensemble(0, 0, 5, 30), TARGET)
    r = j.ensembles[0]
    text = " ".join(verdict_sentences(r, j))
    assert r.systems.n == 0 and "nothing can be said yet" in text and "5 of the 30 unsettled" in text
    assert "can produce" not in text and "%" not in text


def test_too_few_matches_give_no_ks_delta_or_percentiles():
    text = render_text(judge(_ensemble(1, 239), TARGET))
    assert "too few to compare (n = 1 vs 238" in text
    assert "KS p" not in text and "Cliff" not in text
    line = next(x for x in text.splitlines() if x.startswith("  instability began"))
    assert "too few for percentiles, n = 1" in line and "16-84 %" not in line.split("[all:")[0]
    many = render_text(judge(_ensemble(30, 200), TARGET))
    assert "KS p = " in many and "Cliff's delta" in many


def test_numbers_carry_the_precision_of_their_interval():
    text = render_text(judge(_ensemble(1, 240), TARGET))
    assert "0.4 %" in text and "0.42 %" not in text  # 1/240 with an interval 2.3 % wide
    assert "0.011 %" in text and "2.3 %" in text
    assert not re.search(r"\d\.\d+e-\d+ %", text)  # no 1.1e-56 %
    assert _pct(1.1e-58) == "< 0.001 %" and _pct(0.1667, 0.1) == "17 %" and _pct(0.1667, 0.01) == "16.7 %"


def test_upper_bound_line_counts_the_snapshots_apart():
    text = render_text(judge(_ensemble(3, 60, 2, 30), TARGET))
    line = next(x for x in text.splitlines() if x.startswith("upper-bound line"))
    assert "5 / 90" in line and "not an outcome rate" in line
    classes = text.split("by settlement class")[1].split("upper-bound line")[0]
    assert "settled" in classes and "likely_stable" in classes and "unsettled" in classes

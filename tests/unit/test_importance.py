"""Importance sampling for deep BER (``checks.ber.method: importance``).

Oracles from outside the project:
- exact theory: BPSK BER Q(sqrt(2 Eb/N0)) and Gray QPSK the same per bit (J. G. Proakis and
  M. Salehi, *Digital Communications*, 5th ed., McGraw-Hill 2008, 4.3-1 and 4.3-2); square
  16QAM/64QAM Gray BER by Cho and Yoon (IEEE Trans. Commun. 50(7), 2002, eq. 16), as
  implemented and checked against published values in test_theory.py;
- Student's t quantiles from scipy.stats;
- the unbiasedness of a likelihood-ratio weight, E_q[f/q] = 1 (the defining identity of
  importance sampling: P. J. Smith, M. Shafi and H. Gao, IEEE JSAC 15(4), 1997, eq. 3).

The devices (tests/unit/devices/importance.py) are real numpy modems, one defect each.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import stats
from test_records import assert_records

from modemverify.adapters.python import PythonAdapter
from modemverify.blocks import Journal, _along_pulses, _gram_bands
from modemverify.config import load_device, parse_device
from modemverify.demo.tern_modems import TernRrcModem as RrcModem
from modemverify.dsp.pulses import PulseShape
from modemverify.errors import ConfigError
from modemverify.execution import Execution
from modemverify.plan import plan, render_plan
from modemverify.runner import check
from modemverify.schemes.conventions import get_convention
from modemverify.schemes.theory import ber as theory_ber
from modemverify.schemes.theory import ebn0_for_ber
from modemverify.selftest.operators import phase_for_loss
from modemverify.stats.weighted import (
    MAX_SHARE,
    WeightedTally,
    diagnose,
    look_risk,
    neighbour_test,
    weighted_interval,
)
from modemverify.vectors.biasing import KIND_TRUE, NoiseMixture, gabriel_neighbours

DEVICES = Path(__file__).parent / "devices" / "importance.py"


def device_file(tmp_path, target, modulation="qpsk", params="{}", checks=""):
    p = tmp_path / f"{target.lower()}.yaml"
    p.write_text(f"name: {target.lower()}\nadapter: python\ntarget: {DEVICES}:{target}\n"
                 f"params: {params}\nscheme: {{modulation: {modulation}, convention: 3gpp}}\n"
                 f"checks: {{{checks}}}\n")
    return p


def deep(modulation, ber_target, **extra):
    x = round(float(ebn0_for_ber(modulation, ber_target)), 2)
    opts = {"method": "importance", "ebn0_db": [x], **extra}
    return x, "ber: {" + ", ".join(f"{k}: {v}" for k, v in opts.items()) + "}"


def run(tmp_path, target, modulation="qpsk", ber_target=1e-9, params="{}", execution=None,
        **extra):
    x, checks = deep(modulation, ber_target, **extra)
    spec = load_device(device_file(tmp_path, target, modulation, params, checks))
    result = check(spec, only=["ber"], execution=execution)
    return x, {v.name: v for v in result.verdicts}


# -- the biasing ---------------------------------------------------------------------------

@pytest.mark.parametrize("modulation,counts", [
    # square QAM: corners 2 neighbours, edges 3, inner points 4; PSK: 2 around the circle
    # (geometry of the tables, common practice)
    ("qpsk", {2: 4}), ("16qam", {2: 4, 3: 8, 4: 4}), ("64qam", {2: 4, 3: 24, 4: 36}),
    ("8psk", {2: 8}), ("bpsk", {1: 2}),
])
def test_the_translations_aim_at_the_nearest_neighbours_boundaries(modulation, counts):
    nb = gabriel_neighbours(get_convention("gray", modulation).points)
    sizes = np.bincount([n.size for n in nb])
    assert {i: int(c) for i, c in enumerate(sizes) if c} == counts


@pytest.mark.parametrize("modulation", ["bpsk", "qpsk", "16qam", "64qam"])
def test_the_weights_are_likelihood_ratios_whose_mean_under_the_mixture_is_one(modulation):
    conv = get_convention("gray", modulation)
    mix = NoiseMixture(conv.points, conv.rule)
    rng = np.random.default_rng(11)
    n0 = 1 / (conv.bits_per_symbol * 10 ** (ebn0_for_ber(modulation, 1e-8) / 10))
    drawn = mix.draw(rng.integers(0, conv.points.size, 400_000), n0, rng)
    w = drawn.weights
    assert abs(w.mean() - 1) < 5 * w.std() / math.sqrt(w.size)  # E_q[f/q] = 1
    assert w.max() <= 1 / 0.1 + 1e-12   # the defensive component bounds every weight
    # each component's share of the draws is its mixture weight
    assert abs(np.mean(drawn.kind == KIND_TRUE) - 0.1) < 0.005


def test_a_weighted_estimate_of_the_bpsk_tail_matches_q_of_sqrt_2_ebn0():
    # no device: the error event of BPSK "+1" is Re(n) < -1 (Proakis and Salehi 4.3-1)
    conv = get_convention("gray", "bpsk")
    mix = NoiseMixture(conv.points, conv.rule)
    for target in (1e-6, 1e-10):
        ebn0 = float(ebn0_for_ber("bpsk", target))
        n0 = 1 / 10 ** (ebn0 / 10)
        rng = np.random.default_rng(5)
        labels = np.zeros(200_000, dtype=np.int64)
        d = mix.draw(labels, n0, rng)
        x = d.weights * ((conv.points[labels] + d.noise).real * conv.points[0].real < 0)
        tally = WeightedTally.of(x, d.kind == KIND_TRUE)
        ci = weighted_interval(tally, 0.999)
        exact = 0.5 * math.erfc(math.sqrt(10 ** (ebn0 / 10)))
        assert ci.low <= exact <= ci.high, (target, ci, exact)
        assert ci.high - ci.low < 0.1 * exact  # 2e5 draws pin 1e-10 to a few per cent


def test_a_point_turned_by_its_position_is_biased_toward_its_turned_neighbour():
    # pi/2-BPSK (TS 38.211 5.1.1): the point of an odd symbol is turned by +90 degrees, so its
    # translation toward the other point turns with it
    conv = get_convention("3gpp", "pi/2-bpsk")
    mix = NoiseMixture(conv.points, conv.rule)
    d = mix.draw(np.zeros(40_000, dtype=np.int64), 1e-3, np.random.default_rng(2))
    shift = 0.7 * (conv.points[1] - conv.points[0]) / 2  # 70 % of draws are translated
    assert abs(d.noise[0::2].mean() - shift) < 0.02
    assert abs(d.noise[1::2].mean() - 1j * shift) < 0.02


def test_a_differential_scheme_is_refused_by_the_mixture():
    conv = get_convention("gray", "dqpsk")
    with pytest.raises(ConfigError, match="differential"):
        NoiseMixture(conv.points, conv.rule)


@pytest.mark.parametrize("pulse", [PulseShape("rrc", 8, 0.35, 10), PulseShape("rrc", 4, 0.25, 6),
                                   PulseShape("rectangular", 4)], ids=str)
def test_a_change_put_along_the_pulses_moves_each_symbols_projection_by_its_own_part(pulse):
    # the matched filter of the shaped change gives back the change exactly (the pulses' dual
    # basis), where shaping it plainly leaks into the neighbours through the truncated taps
    bands = _gram_bands(pulse)
    rng = np.random.default_rng(0)
    change = rng.standard_normal(500) + 1j * rng.standard_normal(500)
    exact = pulse.matched_filter(_along_pulses(pulse, bands, change), 500)
    assert np.abs(exact - change).max() < 1e-9
    if pulse.shape == "rrc":
        plain = pulse.matched_filter(pulse.shape_symbols(change), 500)
        assert np.abs(plain - change).max() > 1e-3


# -- the statistics ------------------------------------------------------------------------

def test_the_risk_spent_over_every_look_sums_to_the_stated_risk():
    assert sum(look_risk(0.05, j) for j in range(1, 100_000)) == pytest.approx(0.05, rel=1e-4)
    assert look_risk(0.05, 1) == pytest.approx(0.05 / 3)
    assert look_risk(0.05, 2) == pytest.approx(0.05 / 6)


def test_the_interval_is_students_t_on_the_mean_with_the_effective_sample_size():
    rng = np.random.default_rng(4)
    x = np.where(rng.random(5000) < 0.3, rng.exponential(1e-6, 5000), 0.0)
    tally = WeightedTally.of(x, np.zeros(5000, bool))
    ci = weighted_interval(tally, 0.95)
    ess = x.sum() ** 2 / (x ** 2).sum()
    lo, hi = stats.t.interval(0.95, ess - 1, loc=x.mean(), scale=x.std(ddof=1) / math.sqrt(5000))
    assert ci.low == pytest.approx(lo, rel=1e-9) and ci.high == pytest.approx(hi, rel=1e-9)


def test_the_diagnostics_refuse_an_estimate_carried_by_one_symbol():
    x = np.full(10_000, 1e-9)
    x[17] = 1e-6  # a tenth of the whole sum on one symbol, with an effective size near 120
    tally = WeightedTally.of(x, np.zeros(x.size, bool))
    assert tally.max_share > MAX_SHARE and "carries" in diagnose(tally)
    few = WeightedTally.of(np.r_[np.full(20, 1e-8), np.zeros(10_000)], np.zeros(10_020, bool))
    assert "effective sample size" in diagnose(few)
    fine = WeightedTally.of(np.random.default_rng(1).exponential(1e-8, 10_000),
                            np.zeros(10_000, bool))
    assert diagnose(fine) == ""


def test_the_neighbour_test_finds_errors_that_follow_the_previous_symbols_component():
    rng = np.random.default_rng(8)
    true = rng.random(200_000) < 0.1
    x = rng.exponential(1e-8, true.size) * (rng.random(true.size) < 0.2)
    assert neighbour_test(WeightedTally.of(x, true)).dependent() == ""
    dep = x.copy()
    dep[1:][~true[:-1]] *= 1.5  # larger after a biased symbol: memory
    found = neighbour_test(WeightedTally.of(dep, true)).dependent()
    assert "previous symbol" in found and "next" not in found


def test_tallies_add_up_to_the_tally_of_the_whole():
    rng = np.random.default_rng(3)
    x = rng.exponential(1.0, 1000) * (rng.random(1000) < 0.3)
    t = rng.random(1000) < 0.1
    whole = WeightedTally.of(x, t)
    parts = WeightedTally.of(x[:400], t[:400]).add(WeightedTally.of(x[400:], t[400:]))
    for f in ("n", "s", "ss", "top", "hits"):
        assert getattr(parts, f) == pytest.approx(getattr(whole, f))
    # the pair across the cut is the only one a split loses
    assert parts.groups["prev_true"][0] + parts.groups["prev_biased"][0] == 998
    assert WeightedTally.from_json(whole.to_json()) == whole


# -- the check, end to end -----------------------------------------------------------------

@pytest.mark.parametrize("modulation", ["qpsk", "16qam"])
def test_a_correct_device_passes_a_deep_point_and_the_estimate_holds_theory(tmp_path,
                                                                            modulation):
    x, v = run(tmp_path, "Modem", modulation, 1e-10, params=f"{{modulation: {modulation}}}")
    guard, point = v["ber.importance_guard"], v[f"ber.ebn0={x:g}dB"]
    assert guard.outcome == "pass", guard.reason
    assert point.outcome == "pass", point.reason
    lo, hi = point.interval
    assert lo <= float(theory_ber(modulation, x)) <= hi
    d = point.details
    assert d["method"] == "importance" and d["ess"] >= 100 and d["speedup"] > 1e4
    assert d["device_calls"] == d["blocks"] >= 1
    for words in ("importance sampling", "device call", "effective sample size",
                  "plain sampling would need"):
        assert words in point.reason
    assert assert_records(v) == 2  # the guard's record and the point's


def loss_degrees(modulation, ebn0, loss_db):
    """The phase error that costs exactly ``loss_db`` at ``ebn0`` (exact BER of the rotated
    table in the unrotated decision cells: products of Gaussian interval probabilities)."""
    points = get_convention("3gpp", modulation).points
    return math.degrees(phase_for_loss(modulation, points, ebn0, loss_db))


def test_a_device_with_1_db_of_loss_fails_a_deep_point_with_its_loss_named(tmp_path):
    x = round(float(ebn0_for_ber("qpsk", 1e-9)), 2)
    _, v = run(tmp_path, "Rotated", params=f"{{degrees: {loss_degrees('qpsk', x, 1.0)}}}")
    point = v[f"ber.ebn0={x:g}dB"]
    assert point.outcome == "fail", point.reason
    assert "worse than the 0.5 dB margin" in point.reason
    lo, hi = point.details["loss_interval_db"]
    assert lo <= 1.0 <= hi


def test_a_demodulator_with_noise_of_its_own_is_not_judged_by_importance_sampling(tmp_path):
    # its errors come partly from noise the harness did not draw and cannot weight: the
    # estimate's variance would be far larger than it looks (measured: such a device exactly
    # at the limit passed with a 12 % low estimate before this rule)
    x = round(float(ebn0_for_ber("qpsk", 1e-9)), 2)
    _, v = run(tmp_path, "Lossy", params=f"{{ebn0_db: {x}, loss_db: 0.5, seed: 2}}")
    for name in ("ber.importance_guard", f"ber.ebn0={x:g}dB"):
        assert v[name].outcome == "inconclusive", v[name].reason
        assert "different bits for the same samples" in v[name].reason


@pytest.mark.parametrize("target,side", [("Feedback", "previous"), ("Lookahead", "next")])
def test_a_device_with_memory_across_symbols_is_caught_by_the_guard_never_passed(
        tmp_path, target, side):
    x, v = run(tmp_path, target, params="{c: 0.3}")
    guard, point = v["ber.importance_guard"], v[f"ber.ebn0={x:g}dB"]
    assert guard.outcome == "inconclusive"
    assert f"the {side} symbol's noise" in guard.reason
    assert "disagree" in guard.reason and "not valid for this device" in guard.reason
    assert point.outcome == "inconclusive" and "use method: plain" in point.reason


def test_a_fault_outside_the_constellation_is_reached_by_the_variance_scaled_component(
        tmp_path):
    # flips a bit beyond the outer edge at the boundary's distance: about twice the I-bit
    # errors, a true loss near 0.1 dB; the translations do not aim there, the scaled part does
    x, v = run(tmp_path, "Outward", ber_target=1e-9)
    point = v[f"ber.ebn0={x:g}dB"]
    assert v["ber.importance_guard"].outcome == "pass"
    assert point.statistic > 1.3 * float(theory_ber("qpsk", x)), point.reason


#: a device near the limit (4.5 degrees of phase error cost 0.55 dB at QPSK 1e-9) in small
#: blocks: the point takes hundreds of blocks to decide, so workers run ahead and a resume
#: has something to resume
NEAR = dict(target="Rotated", params="{degrees: 4.5}", ber_target=1e-9, margin_db=0.56,
            block_bits=4096, max_bits=3e6)


def run_shaped(device, modulation="qpsk", ber_target=1e-9, **scheme):
    x = round(float(ebn0_for_ber(modulation, ber_target)), 2)
    spec = parse_device({"name": "rrc", "adapter": "python", "target": "x:y",
                         "scheme": {"modulation": modulation, "convention": "3gpp",
                                    "samples_per_symbol": 8,
                                    "pulse": {"shape": "rrc", "rolloff": 0.35, "span": 10},
                                    **scheme},
                         "checks": {"ber": {"method": "importance", "ebn0_db": [x]}}})
    res = check(spec, only=["ber"], adapter=PythonAdapter(device))
    return x, {v.name: v for v in res.verdicts}


@pytest.mark.parametrize("modulation,extra", [
    ("qpsk", {}),
    # a transmitter with 3 samples of delay and 7 degrees of phase, heard by the reference
    # receiver after the alignment: the noise is biased at the device's own timing
    ("16qam", {"lead": 3, "phase_deg": 7, "receiver": False}),
])
def test_a_shaped_device_is_judged_at_a_deep_point_along_its_own_pulses(modulation, extra):
    # an independent RRC build (the demo's third-party code)
    x, v = run_shaped(RrcModem(modulation, sps=8, rolloff=0.35, span=10, **extra), modulation)
    assert v["ber.importance_guard"].outcome == "pass", v["ber.importance_guard"].reason
    point = v[f"ber.ebn0={x:g}dB"]
    assert point.outcome == "pass", point.reason
    # the truncated taps' own inter-symbol interference costs a few hundredths of a dB
    assert -0.05 < point.details["loss_db"] < 0.1


def test_a_fractional_delay_is_not_biased_along_the_wrong_pulses():
    x, v = run_shaped(RrcModem("qpsk", sps=8, rolloff=0.35, span=10, frac=0.5))
    guard = v["ber.importance_guard"]
    assert guard.outcome == "inconclusive" and "fractional delay" in guard.reason
    assert v[f"ber.ebn0={x:g}dB"].outcome == "inconclusive"


def test_the_verdicts_do_not_depend_on_the_worker_count(tmp_path):
    x, one = run(tmp_path, **NEAR)
    assert one[f"ber.ebn0={x:g}dB"].details["blocks"] > 20
    for execution in (Execution(workers=2), Execution(workers=2, cluster="local")):
        many = run(tmp_path, **NEAR, execution=execution)[1]
        assert one.keys() == many.keys()
        for name in one:
            a, b = one[name], many[name]
            assert (a.outcome, a.statistic, a.interval, a.reason, a.details) == \
                (b.outcome, b.statistic, b.interval, b.reason, b.details), (name, execution)


def test_a_resumed_point_continues_from_its_kept_tally(tmp_path):
    # a journal that keeps states in memory: a first run interrupted after a few blocks, then
    # a second run from what was kept gives the uninterrupted verdict
    class Memory(Journal):
        def __init__(self, stop_after=None):
            self.points, self.stop_after, self.saves = {}, stop_after, 0

        def load(self, device, point):
            return self.points.get(point)

        def save(self, device, point, state):
            self.points[point] = {"state": state}
            self.saves += 1
            if self.stop_after is not None and self.saves >= self.stop_after:
                raise KeyboardInterrupt

        def decided(self, device, point, verdict):
            self.points[point] = {"verdict": verdict.to_json()}

    near = dict(NEAR)
    x, checks = deep("qpsk", near.pop("ber_target"), **{k: near.pop(k) for k in
                                                         ("margin_db", "block_bits",
                                                          "max_bits")})
    spec = load_device(device_file(tmp_path, near["target"], "qpsk", near["params"], checks))
    whole = {v.name: v for v in check(spec, only=["ber"]).verdicts}
    journal = Memory(stop_after=5)
    try:
        check(spec, only=["ber"], journal=journal)
    except KeyboardInterrupt:
        pass
    name = f"ber.ebn0={x:g}dB"
    assert "verdict" in journal.points["ber.importance_guard"]
    assert journal.points[name]["state"]["blocks"] == 5
    journal.stop_after = None
    again = {v.name: v for v in check(spec, only=["ber"], journal=journal).verdicts}
    assert (again[name].outcome, again[name].statistic, again[name].details) == \
        (whole[name].outcome, whole[name].statistic, whole[name].details)


def test_a_device_exactly_at_the_limit_is_not_passed_when_the_budget_ends(tmp_path):
    # at confidence 0.999 a pass has probability at most 1e-3 (the rate at the default 0.95 is
    # measured over 200 seeds in benchmarks/bench_importance.py)
    x = round(float(ebn0_for_ber("qpsk", 1e-9)), 2)
    _, v = run(tmp_path, "Rotated", params=f"{{degrees: {loss_degrees('qpsk', x, 0.5)}}}",
               max_bits=1e6, confidence=0.999)
    point = v[f"ber.ebn0={x:g}dB"]
    assert point.outcome == "inconclusive", point.reason
    assert "budget of 1e+06 bits spent" in point.reason


def test_the_plan_gives_the_guard_and_a_first_block_per_point_not_the_plain_averages(tmp_path):
    x, checks = deep("qpsk", 1e-9)
    spec = load_device(device_file(tmp_path, "Modem", "qpsk", "{}", checks))
    text = render_plan(plan(spec))
    assert "first the guard at 8.4 dB (theory 0.0001)" in text
    assert f"{x:g}dB" in text and "1.31e+05" in text
    # plain sampling at 1e-9 would warn that max_bits cannot decide it; importance does not
    assert "warning" not in text


def test_an_apsk_device_is_judged_at_a_deep_point_on_its_own_rings():
    # 16APSK at code rate 3/4 (EN 302 307-1 5.4.3, ring ratio 2.85): the translations aim at
    # the ring neighbours' boundaries; theory by exact integration over the decision regions
    ring = (2.85,)
    x = round(float(ebn0_for_ber("16apsk", 1e-8, ring_ratio=ring)), 2)
    spec = parse_device({"name": "apsk", "adapter": "reference",
                         "scheme": {"modulation": "16apsk", "convention": "dvb-s2",
                                    "code_rate": "3/4"},
                         "checks": {"ber": {"method": "importance", "ebn0_db": [x],
                                            "confidence": 0.999}}})
    v = {r.name: r for r in check(spec, only=["ber"]).verdicts}
    point = v[f"ber.ebn0={x:g}dB"]
    assert v["ber.importance_guard"].outcome == "pass" and point.outcome == "pass", point.reason
    lo, hi = point.interval
    assert lo <= float(theory_ber("16apsk", x, ring_ratio=ring)) <= hi

"""Two integer-grid 16QAM libraries as they ship (komm, scikit-commpy): one defect, one verdict.

Both libraries put 16QAM at +-1, +-3 per axis (mean energy 10; the published tables are scaled
to unit energy: IEEE Std 802.11-2007 17.3.5.7, K_MOD = 1/sqrt(10)), with the labelling of IEEE
802.11 Table 17-9 (what ``identify`` reports for both, tests/unit/test_identify_thirdparty.py).
So ``energy`` must fail and name the missing 1/sqrt(10); every later check works at the device's
measured scale and judges what the library really does: komm's L-values mean bit 0 when positive
(as the device file declares by default), commpy's LLRs mean bit 1 (its modulation.py:
log(P(b=1) / P(b=0))), and BER at the nominal energy is not a pass, because noise set for Es = 1
is 10 dB too weak for symbols that carry Es = 10.
"""

from __future__ import annotations

from pathlib import Path

import pytest

pytest.importorskip("komm")
pytest.importorskip("commpy.modulation")

from modemverify.runner import check  # noqa: E402

DEVICES = Path(__file__).parent / "devices" / "integer_grid.py"
#: a small soft-output sample (commpy's soft demapper loops in Python) and a short BER run
CHECKS = "checks: {llr: {bits: 16000}, roundtrip: {max_examples: 40}}"


def device_file(tmp_path, cls, extra=""):
    p = tmp_path / f"{cls}.yaml"
    p.write_text(f"name: {cls}\nadapter: python\ntarget: {DEVICES}:{cls}\n"
                 f"scheme: {{modulation: 16qam, convention: ieee802.11{extra}}}\n{CHECKS}\n")
    return p


@pytest.fixture(scope="module")
def verdicts(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("grid")
    return {cls: {v.name: v for v in check(device_file(tmp, cls)).verdicts}
            for cls in ("Komm16qam", "Commpy16qam")}


@pytest.mark.parametrize("cls", ["Komm16qam", "Commpy16qam"])
def test_the_normalisation_fails_energy_and_nothing_before_it(verdicts, cls):
    v = verdicts[cls]
    # 10 log10(10) = +10 dB from unit energy; the factor the standard applies is 1/sqrt(10)
    assert v["energy"].outcome == "fail" and "1/sqrt(10) looks missing" in v["energy"].reason
    assert v["energy"].statistic == pytest.approx(10.0, abs=1e-9)
    assert v["mapping"].outcome == "pass" and "gain 3.162" in v["mapping"].reason
    for name in ("finite", "length.modulate", "length.demodulate", "gray", "roundtrip"):
        assert v[name].outcome == "pass", v[name].reason


@pytest.mark.parametrize("cls", ["Komm16qam", "Commpy16qam"])
def test_evm_is_judged_at_the_measured_scale(verdicts, cls):
    evm = verdicts[cls]["evm"]
    assert evm.outcome == "pass" and evm.statistic < 1e-6, evm.reason


def test_komm_soft_outputs_pass_at_the_device_scale(verdicts):
    v = verdicts["Komm16qam"]
    for part in ("sign", "calibration", "mutual_information"):
        assert v[f"llr.{part}"].outcome == "pass", v[f"llr.{part}"].reason
    assert "positive LLR means bit 0, as declared" in v["llr.sign"].reason


def test_commpy_sign_fails_naming_the_convention_and_the_key(verdicts):
    v = verdicts["Commpy16qam"]
    sign = v["llr.sign"]
    assert sign.outcome == "fail"
    assert "a positive LLR means bit 1" in sign.reason
    assert "scheme.llr_positive_bit" in sign.reason
    assert sign.statistic < 0.01  # every confident sign disagrees: a flip, not a relabelling
    for part in ("calibration", "mutual_information"):
        assert v[f"llr.{part}"].outcome == "skipped"
        assert "llr.sign failed" in v[f"llr.{part}"].reason


@pytest.mark.parametrize("cls", ["Komm16qam", "Commpy16qam"])
def test_ber_at_the_nominal_energy_does_not_pass(verdicts, cls):
    points = [v for n, v in verdicts[cls].items() if n.startswith("ber.")]
    assert len(points) == 3
    for p in points:
        assert p.outcome == "fail", p.reason
        assert "noise reference is wrong" in p.reason
        assert "Es = 10 (+10.00 dB" in p.reason and "energy verdict" in p.reason
        assert "checks.ber.energy: measured" in p.reason


def test_declaring_commpy_s_sign_passes_its_soft_outputs(tmp_path):
    res = check(device_file(tmp_path, "Commpy16qam", extra=", llr_positive_bit: 1"),
                only=["mapping", "llr"])
    v = {x.name: x for x in res.verdicts}
    for part in ("sign", "calibration", "mutual_information"):
        assert v[f"llr.{part}"].outcome == "pass", v[f"llr.{part}"].reason


@pytest.mark.parametrize("cls", ["Komm16qam", "Commpy16qam"])
def test_ber_at_the_measured_energy_passes(tmp_path, cls):
    # the demodulators are nearest-point slicers on their own grid: at their own scale they
    # are exactly the theory's detector
    p = device_file(tmp_path, cls)
    p.write_text(p.read_text().replace(
        CHECKS, "checks: {ber: {energy: measured, ebn0_db: [7.9, 10.5]}}"))
    res = check(p, only=["ber"])
    assert [v.outcome for v in res.verdicts] == ["pass", "pass"], \
        [v.reason for v in res.verdicts]

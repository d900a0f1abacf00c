"""Each oracle passes the reference and catches a deliberately broken device."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import TableModem

from modemverify.oracles import ORACLES
from modemverify.runner import run_oracle
from modemverify.schemes.conventions import MODULATIONS, get_convention


def run(bench, name, **opts):
    oracle = ORACLES[name]
    from modemverify.options import validate_options

    return list(run_oracle(oracle, bench, validate_options(oracle.options, opts, file=None,
                                                           key=name), seed=7))


def ref_table(mod="16qam", conv="3gpp"):
    return get_convention(conv, mod).points.copy()


# the memoryless tables (the schemes with a symbol rule, 16APSK and 1024QAM:
# tests/unit/test_symbol_rules.py)
@pytest.mark.parametrize("mod", ["bpsk", "qpsk", "8psk", "16qam", "64qam", "256qam"])
def test_reference_tables_pass_everything(bench_for, mod):
    conv = "3gpp" if mod != "8psk" else "dvb-s2"
    dev = TableModem(ref_table(mod, conv), MODULATIONS[mod])
    bench = bench_for(dev, mod, conv)
    for name in ORACLES:
        for v in run(bench, name):
            assert v.outcome in ("pass", "skipped"), v.render()


# --- mapping ------------------------------------------------------------------------------
def test_mapping_names_swapped_arms(bench_for):
    t = ref_table()
    dev = TableModem(t.imag + 1j * t.real, 4)
    [v] = run(bench_for(dev, "16qam"), "mapping")
    assert v.outcome == "fail" and "I and Q arms swapped" in v.reason
    assert v.counterexample.startswith("bits=")


def test_mapping_names_polarity(bench_for):
    dev = TableModem(-ref_table("qpsk"), 2)
    [v] = run(bench_for(dev, "qpsk"), "mapping")
    assert v.outcome == "fail" and "inverted" in v.reason


def test_mapping_names_two_labels_trading_places(bench_for):
    t = ref_table()
    t[[3, 9]] = t[[9, 3]]
    [v] = run(bench_for(TableModem(t, 4), "16qam"), "mapping")
    assert v.outcome == "fail" and "labels 0011 and 1001 trade places" in v.reason


def test_mapping_catches_claim_of_wrong_convention(bench_for):
    dev = TableModem(ref_table("16qam", "ieee802.11"), 4)
    [v] = run(bench_for(dev, "16qam", "3gpp"), "mapping")
    assert v.outcome == "fail"


def test_mapping_allows_positive_gain_only(bench_for):
    [v] = run(bench_for(TableModem(2.5 * ref_table(), 4), "16qam"), "mapping")
    assert v.outcome == "pass"
    [v] = run(bench_for(TableModem(1j * ref_table(), 4), "16qam"), "mapping")
    assert v.outcome == "fail" and "rotated by 90 degrees" in v.reason


def test_mapping_catches_memory(bench_for):
    class Leaky(TableModem):
        def modulate(self, bits):
            y = super().modulate(bits)
            y[1:] += 0.2 * y[:-1]  # inter-symbol leakage: a state bug
            return y

    [v] = run(bench_for(Leaky(ref_table(), 4), "16qam"), "mapping")
    assert v.outcome == "fail" and "depends on the neighbouring symbols" in v.reason


def test_mapping_from_demodulate_only(bench_for):
    t = ref_table()
    good = TableModem(t, 4, sides=("demodulate",))
    [v] = run(bench_for(good, "16qam"), "mapping")
    assert v.outcome == "pass"
    bad = TableModem(t.imag + 1j * t.real, 4, sides=("demodulate",))
    [v] = run(bench_for(bad, "16qam"), "mapping")
    assert v.outcome == "fail" and "arms swapped" in v.reason


# --- gray ---------------------------------------------------------------------------------
def test_gray_catches_natural_table(bench_for):
    dev = TableModem(ref_table("16qam", "natural"), 4)
    [v] = run(bench_for(dev, "16qam"), "gray")
    assert v.outcome == "fail"
    assert v.statistic > 1 and "differ in more than one bit" in v.reason


def test_gray_skips_natural_claim(bench_for):
    [v] = run(bench_for(TableModem(ref_table("16qam", "natural"), 4), "16qam", "natural"),
              "gray")
    assert v.outcome == "skipped"


# --- energy -------------------------------------------------------------------------------
def test_energy_names_missing_normalisation(bench_for):
    dev = TableModem(ref_table() * np.sqrt(10), 4)
    [v] = run(bench_for(dev, "16qam"), "energy")
    assert v.outcome == "fail" and "1/sqrt(10) looks missing" in v.reason
    assert v.statistic == pytest.approx(10.0, abs=1e-9)


def test_energy_tolerance(bench_for):
    dev = TableModem(ref_table() * 10 ** (0.05 / 20), 4)  # +0.05 dB
    assert run(bench_for(dev, "16qam"), "energy")[0].outcome == "pass"
    assert run(bench_for(dev, "16qam"), "energy", tolerance_db=0.01)[0].outcome == "fail"


# --- finite -------------------------------------------------------------------------------
def test_finite_names_the_label(bench_for):
    t = ref_table()
    t[0b0110] = np.nan
    [v] = run(bench_for(TableModem(t, 4), "16qam"), "finite")
    assert v.outcome == "fail" and "0110" in v.reason


# --- length -------------------------------------------------------------------------------
def test_length_catches_dropped_tail(bench_for):
    class DropsLast(TableModem):
        def modulate(self, bits):
            y = super().modulate(bits)
            return y[:-1] if len(y) > 16 else y

    vs = run(bench_for(DropsLast(ref_table(), 4), "16qam"), "length")
    mod = next(v for v in vs if v.name == "length.modulate")
    assert mod.outcome == "fail" and "17 symbols" in mod.counterexample
    assert "always -1 samples" in mod.reason
    assert next(v for v in vs if v.name == "length.demodulate").outcome == "pass"


def test_length_catches_extra_demodulated_bits(bench_for):
    class Pads(TableModem):
        def demodulate(self, samples):
            b = super().demodulate(samples)
            return np.concatenate([b, np.zeros((-len(b)) % 8, np.uint8)])  # pads to bytes

    vs = run(bench_for(Pads(ref_table("64qam"), 6), "64qam"), "length")
    demod = next(v for v in vs if v.name == "length.demodulate")
    assert demod.outcome == "fail"


# --- roundtrip ----------------------------------------------------------------------------
def test_roundtrip_shrinks_to_minimal_counterexample(bench_for):
    class FlipsAfterEight(TableModem):
        """Demodulator bug: flips the last bit of every symbol after the eighth."""

        def demodulate(self, samples):
            b = super().demodulate(samples).reshape(-1, self.k)
            b[8:, -1] ^= 1
            return b.ravel()

    [v] = run(bench_for(FlipsAfterEight(ref_table("qpsk"), 2), "qpsk"), "roundtrip")
    assert v.outcome == "fail"
    # the smallest failing input is nine all-zero symbols
    assert v.counterexample.startswith("bits=[" + " ".join(["00"] * 9) + "]")


def test_roundtrip_reports_device_exception_as_error(bench_for):
    class Crashes(TableModem):
        def demodulate(self, samples):
            if len(samples) > 5:
                raise RuntimeError("buffer overrun")
            return super().demodulate(samples)

    [v] = run(bench_for(Crashes(ref_table("qpsk"), 2), "qpsk"), "roundtrip")
    assert v.outcome == "error" and "buffer overrun" in v.counterexample


def test_roundtrip_with_one_side_uses_reference(bench_for):
    dev = TableModem(ref_table("qpsk"), 2, sides=("modulate",))
    [v] = run(bench_for(dev, "qpsk"), "roundtrip")
    assert v.outcome == "pass" and "reference demodulate" in v.reason


# --- one defect, one failing verdict ------------------------------------------------------
def test_evm_is_skipped_naming_mapping_when_the_table_is_another(bench_for):
    t = ref_table()
    bench = bench_for(TableModem(t.imag + 1j * t.real, 4), "16qam")  # arms swapped
    assert run(bench, "mapping")[0].outcome == "fail"
    [v] = run(bench, "evm")
    assert v.outcome == "skipped" and "not judged because mapping failed" in v.reason


def test_evm_still_judges_a_table_whose_points_depend_on_neighbours(bench_for):
    class Leaky(TableModem):
        def modulate(self, bits):
            y = super().modulate(bits)
            y[1:] += 0.2 * y[:-1]  # the table is the claimed one, smeared: EVM measures that
            return y

    bench = bench_for(Leaky(ref_table(), 4), "16qam")
    assert run(bench, "mapping")[0].outcome == "fail"
    [v] = run(bench, "evm")
    assert v.outcome == "fail" and v.statistic > 12.5


def test_a_scaled_device_fails_energy_alone(bench_for):
    # the 3GPP table without its 1/sqrt(10) (TS 38.211 5.1.4): only energy may fail
    bench = bench_for(TableModem(ref_table() * np.sqrt(10), 4), "16qam")
    verdicts = [v for name in ORACLES if name != "ber" for v in run(bench, name)]
    failed = [v.name for v in verdicts if v.outcome not in ("pass", "skipped")]
    assert failed == ["energy"], [v.reason for v in verdicts if v.name in failed]
    assert bench.scale().gain == pytest.approx(np.sqrt(10), rel=1e-12)
    assert bench.scale().symbol_gain == pytest.approx(np.sqrt(10), rel=1e-12)


def test_a_scaled_transmitter_is_received_at_its_own_scale(bench_for):
    # modulate only: the reference's slicer hears the device through its measured gain
    dev = TableModem(ref_table() * 3.0, 4, sides=("modulate",))
    [v] = run(bench_for(dev, "16qam"), "roundtrip")
    assert v.outcome == "pass" and "reference demodulate" in v.reason


def test_oracles_declare_the_names_they_report(bench_for):
    bench = bench_for(TableModem(ref_table(), 4), "16qam")
    for name, oracle in ORACLES.items():
        got = [v.name for v in run(bench, name)]
        assert got == oracle.verdict_names(bench.spec), name

"""BER campaigns at scale: the same verdicts on 1, 2 or 3 workers and on a Dask LocalCluster,
interrupted and resumed runs, refused campaign files, workers that cannot open or lose the
device, and the plan.

The oracle throughout is the run in one process: a parallel run must give its verdicts field
by field (the time each took aside), since every block has its own random stream
(modemverify.blocks). The BER figures themselves are checked against theory elsewhere
(test_ber.py, tests/statistical).
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from dataclasses import asdict
from pathlib import Path

import numpy as np
import pytest

from modemverify.blocks import block_schedule, block_seed
from modemverify.config import load_device
from modemverify.execution import CampaignFile, Execution
from modemverify.errors import ConfigError
from modemverify.runner import check
from modemverify.stats import expected_sample_size

DEVICES = Path(__file__).parent / "devices" / "campaign.py"
#: three points that each take several blocks (a small margin), so that workers run ahead
#: and blocks past a decision are dropped
LONG_POINTS = "ber: {ebn0_db: [5, 6.5, 7.5], margin_db: 0.12, max_bits: 6e6}"


def device_file(tmp_path, name, target="Qpsk", checks=LONG_POINTS, params="{}", extra=""):
    p = tmp_path / f"{name}.yaml"
    p.write_text(f"name: {name}\nadapter: python\ntarget: {DEVICES}:{target}\n"
                 f"params: {params}\nscheme: {{modulation: qpsk, convention: 3gpp}}\n"
                 f"checks: {{{checks}}}\n{extra}")
    return p


def fields(result):
    return [{k: v for k, v in asdict(x).items() if k != "duration_s"} for x in result.verdicts]


def test_the_schedule_and_the_streams_do_not_depend_on_the_workers():
    # the schedule covers the budget exactly, in whole units, doubling up to the largest
    blocks = list(block_schedule(1 << 17, 1 << 19, 3_000_016, 16))
    assert [b[0] for b in blocks] == list(range(len(blocks)))
    assert all(o == sum(n for _, _, n in blocks[:i]) for i, (_, o, _) in enumerate(blocks))
    assert sum(n for *_, n in blocks) == 3_000_016
    assert [n for *_, n in blocks[:3]] == [1 << 17, 1 << 18, 1 << 19]
    # every block's stream is its own: none equals another's
    draws = {int(np.random.default_rng(block_seed(1, "ber", "p", i)).integers(1 << 62))
             for i in range(50)}
    assert len(draws) == 50


def test_one_check_gives_the_same_verdicts_on_1_2_3_workers_and_a_local_cluster(tmp_path):
    spec = load_device(device_file(tmp_path, "port"))
    one = check(spec, only=["ber"])
    # decided (pass or fail: the equality is the point here) after several blocks, so that
    # workers run ahead of the decision
    assert len(one.verdicts) == 3 and {v.outcome for v in one.verdicts} <= {"pass", "fail"}
    assert max(v.details["blocks"] for v in one.verdicts) >= 3
    for execution in (Execution(workers=2), Execution(workers=3),
                      Execution(workers=2, cluster="local")):
        many = check(spec, only=["ber"], execution=execution)
        assert not any("could not start" in v.reason for v in many.verdicts), many.verdicts
        assert fields(many) == fields(one), execution


def test_a_device_that_cannot_be_opened_in_a_worker_is_an_error_verdict_that_says_why(tmp_path):
    spec = load_device(device_file(tmp_path, "fixture", "MainProcessOnly",
                                   checks="ber: {ebn0_db: [4, 6]}"))
    result = check(spec, only=["ber"], execution=Execution(workers=2))
    assert {v.outcome for v in result.verdicts} == {"error"}
    reason = result.verdicts[0].reason
    assert "could not open the device" in reason and "held by the process" in reason
    # the same device in one process is judged
    assert "error" not in {v.outcome for v in check(spec, only=["ber"]).verdicts}


def test_a_worker_that_dies_ends_the_point_with_an_error_not_a_hung_run(tmp_path):
    spec = load_device(device_file(tmp_path, "crashy", "DiesInWorker",
                                   checks="ber: {ebn0_db: [4, 6]}"))
    result = check(spec, only=["ber"], execution=Execution(workers=2))
    assert result.verdicts and {v.outcome for v in result.verdicts} == {"error"}
    assert "worker process died" in result.verdicts[0].reason


def cli(*args):
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(sys.path), "CI": "1"}
    return subprocess.Popen([sys.executable, "-m", "modemverify.cli", *map(str, args)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def verdicts(report):
    data = json.loads((report / "verdicts.json").read_text())
    return [{k: v for k, v in d.items() if k != "duration_s"}
            for device in data for d in device["verdicts"]]


def test_sigterm_midway_then_resume_gives_the_verdict_of_the_uninterrupted_run(tmp_path):
    # the first point decides in 4 blocks; the second spends its 25 blocks (0.1 s each at
    # least) and ends inconclusive: every sub-block count it measured is in its interval
    path = device_file(tmp_path, "slow", params="{delay_s: 0.1}",
                       checks="ber: {ebn0_db: [1, 7], margin_db: 0.03, max_bits: 1.2e7}")
    report = tmp_path / "report"
    proc = cli("check", path, "--only", "ber", "--report", report)
    state = report / "campaign.json"
    try:
        deadline = time.monotonic() + 120
        while True:  # wait until the long point has kept a few blocks
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline
            try:
                points = json.loads(state.read_text())["devices"]["slow"]["points"]
            except (FileNotFoundError, json.JSONDecodeError, KeyError):
                points = {}
            kept = points.get("ber.ebn0=7dB", {}).get("state", {}).get("blocks", 0)
            if kept >= 4:
                break
            time.sleep(0.05)
        proc.send_signal(signal.SIGTERM)
        out, err = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 130, out + err
    assert "--resume" in out and "Traceback" not in err
    saved = json.loads(state.read_text())["devices"]["slow"]["points"]
    assert "verdict" in saved["ber.ebn0=1dB"] and saved["ber.ebn0=7dB"]["state"]["blocks"] >= 4
    again = cli("check", path, "--only", "ber", "--report", report, "--resume")
    out, err = again.communicate(timeout=300)
    assert again.returncode in (0, 1), out + err
    kept = saved["ber.ebn0=7dB"]["state"]["blocks"]
    assert "resumed: ber.ebn0=1dB was decided before the interrupt" in out
    assert f"resumed: ber.ebn0=7dB continues at block {kept}" in out
    whole = tmp_path / "whole"
    ref = cli("check", path, "--only", "ber", "--report", whole)
    ref.communicate(timeout=300)
    assert verdicts(report) == verdicts(whole)
    assert len(verdicts(whole)) == 2


def test_a_campaign_file_of_another_seed_version_or_device_file_is_refused(tmp_path):
    path = device_file(tmp_path, "port", checks="ber: {ebn0_db: [4]}")
    report = tmp_path / "report"
    proc = cli("check", path, "--report", report, "--only", "ber")
    proc.communicate(timeout=120)
    assert proc.returncode == 0
    state = report / "campaign.json"
    # another seed
    proc = cli("check", path, "--report", report, "--only", "ber", "--resume", "--seed", "7")
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 2 and "campaign.json" in err and "--seed" in err, err
    # another content of the device file
    path.write_text(path.read_text().replace("ebn0_db: [4]", "ebn0_db: [4.5]"))
    proc = cli("check", path, "--report", report, "--only", "ber", "--resume")
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 2 and "another content of the device file" in err, err
    # another modemverify version
    data = json.loads(state.read_text())
    data["modemverify"] = "0.0.1"
    state.write_text(json.dumps(data))
    with pytest.raises(ConfigError, match="written by modemverify 0.0.1"):
        CampaignFile(state, seed=data["seed"], resume=True)
    # nothing to resume
    with pytest.raises(ConfigError, match="no campaign file"):
        CampaignFile(tmp_path / "none.json", seed=1, resume=True)


def test_plan_prints_the_expected_bits_and_check_warns_before_an_undecidable_point(tmp_path):
    path = device_file(tmp_path, "port", checks="ber: {ebn0_db: [6, 9], max_bits: 2e4}")
    proc = cli("plan", path, "--workers", "2")
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 0, err
    rows = [line.split() for line in out.splitlines() if line.strip().startswith(("6dB", "9dB"))]
    assert [r[0] for r in rows] == ["6dB", "9dB"]
    # the averages printed are Wald's, at the points' risk (0.05 over 2 points)
    from modemverify.schemes.theory import ber
    p0, p1 = ber("qpsk", 9.0), ber("qpsk", 8.5)
    assert float(rows[1][3]) == pytest.approx(expected_sample_size(p0, p0, p1, 0.025, 0.025),
                                              rel=1e-2)
    assert "probably end inconclusive" in out and "2 workers" in out
    proc = cli("check", path, "--only", "ber")
    out, err = proc.communicate(timeout=120)
    lines = out.splitlines()
    warning = next(i for i, line in enumerate(lines) if "warning: ber.ebn0=9dB" in line)
    first_verdict = next(i for i, line in enumerate(lines) if "ber.ebn0=6dB" in line
                         and "warning" not in line)
    assert warning < first_verdict  # up front, before the budget is spent

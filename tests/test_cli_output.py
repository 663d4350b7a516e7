"""The command line's own behaviour: --version, output into a closed pipe, the
check summary's named quantities."""

from __future__ import annotations

import subprocess
import sys

import opspace
from conftest import REPO, run_cli_module


def test_version():
    res = run_cli_module("--version")
    assert res.returncode == 0 and res.stdout.strip() == f"opspace {opspace.__version__}"


def test_output_into_a_closed_pipe_ends_quietly():
    # as `opspace check | head -0`: the reader is gone before the first write
    proc = subprocess.Popen([sys.executable, "-m", "opspace", "check"], cwd=REPO,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()
    err = proc.stderr.read().decode()
    code = proc.wait(timeout=120)
    assert err == "", err
    assert code == 141          # 128 + SIGPIPE, what a shell reports


def test_check_names_its_quantities():
    res = run_cli_module("check")
    assert res.returncode == 0
    out = res.stdout
    assert "wheel mass" not in out
    for words in ("straight-line mass per wheel", "yaw inertia of the whole robot about the pivot",
                  "2x2 wheel inertia matrix"):
        assert words in out


def test_tracking_targets_come_from_the_scenario(tmp_path):
    from dataclasses import replace

    from opspace.description import load_scenario
    from opspace.report import tracking_targets
    from conftest import DEMO
    sc = load_scenario(DEMO.with_name("pick.toml"))
    assert (sc.tracking_rms, sc.tracking_peak) == (0.005, 0.015)
    assert tracking_targets(sc) == {"5 mm RMS target": 0.005, "15 mm peak target": 0.015}
    assert tracking_targets(replace(sc, tracking_rms=None, tracking_peak=None)) == {}
    text = DEMO.with_name("pick.toml").read_text().replace("tracking_rms = 0.005", "tracking_rms = -1")
    bad = tmp_path / "pick.toml"
    bad.write_text(text.replace('robot = "robot.toml"', f'robot = "{DEMO.as_posix()}"'))
    import pytest
    with pytest.raises(opspace.ConfigError, match="tracking_rms"):
        load_scenario(bad)

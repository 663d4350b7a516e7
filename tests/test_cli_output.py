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

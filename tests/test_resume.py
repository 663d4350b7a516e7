"""Resuming a sweep: a killed main process or worker loses no finished point
and computes none twice; a damaged output folder is refused and left as it
is; workers end when the main process dies."""

from __future__ import annotations

import csv
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

import opspace
from opspace.sweep import load_sweep, run_sweep

REPO = Path(__file__).resolve().parent.parent
MARMOT = REPO / "models" / "marmot"

CYCLE = """[cycle]
robot = "robot.toml"
catalogue = "drives.toml"
cycles_per_hour = 30
sample_rate = 20
arm_start = "stowed"

[[segment]]
kind = "straight"
distance = 2.0
speed = 1.0
acceleration = 0.8

[[segment]]
kind = "arm"
to = "carry"
duration = 1.5
"""

SWEEP = """[sweep]
name = "resume test"
duty_cycle = "short.toml"
figures = ["robot.mass", "max(wheels.peak_torque.*)"]

[[parameter]]
key = "robot.base.mass"
values = [40.0, 44.0, 48.0, 52.0, 56.0, 60.0, 64.0, 68.0, 72.0, 76.0]
"""


@pytest.fixture
def sweep_file(tmp_path):
    for name in ("robot.toml", "arm.urdf", "drives.toml"):
        shutil.copy(MARMOT / name, tmp_path / name)
    (tmp_path / "short.toml").write_text(CYCLE)
    path = tmp_path / "resume.toml"
    path.write_text(SWEEP)
    return path


def rows(out):
    with open(out / "sweep.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def children(pid):
    """Every descendant process of `pid` (from /proc)."""
    parents = {}
    for entry in Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                stat = (entry / "stat").read_text()
            except OSError:
                continue
            parents[int(entry.name)] = int(stat.rsplit(")", 1)[1].split()[1])
    found, todo = set(), [pid]
    while todo:
        p = todo.pop()
        kids = [c for c, pp in parents.items() if pp == p]
        found.update(kids)
        todo += kids
    return found


def alive(pid):
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state not in ("Z", "X")


def start(sweep_file, out):
    env = {**os.environ, "PYTHONPATH": str(REPO)}
    return subprocess.Popen([sys.executable, "-m", "opspace", "sweep", str(sweep_file), "-o",
                             str(out), "--workers", "2", "-q"], cwd=REPO, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def wait_rows(out, n, proc, timeout=120.0):
    t0 = time.monotonic()
    while time.monotonic() - t0 < timeout:
        if (out / "sweep.csv").exists() and len(rows(out)) >= n:
            return
        assert proc.poll() is None, proc.communicate()
        time.sleep(0.05)
    pytest.fail("the sweep wrote no rows")


def workers_of(proc):
    """The worker processes (grand-children through the fork server)."""
    t0 = time.monotonic()
    while time.monotonic() - t0 < 30:
        kids = children(proc.pid)
        if len(kids) >= 3:          # the fork server and two workers
            return kids
        time.sleep(0.05)
    pytest.fail("no worker processes")


def test_kill_9_of_a_worker_then_of_the_main_process_then_resume(sweep_file, tmp_path):
    # one run for both kills (each start costs seconds): a worker first (the
    # pool is rebuilt and its points resubmitted), then the main process
    out = tmp_path / "out"
    proc = start(sweep_file, out)
    wait_rows(out, 1, proc)
    os.kill(max(workers_of(proc)), signal.SIGKILL)     # the youngest: a worker, not the fork server
    wait_rows(out, 4, proc)
    kids = workers_of(proc)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    t0 = time.monotonic()       # the workers notice within their watch period (0.5 s)
    while any(alive(k) for k in kids) and time.monotonic() - t0 < 10:
        time.sleep(0.1)
    assert not any(alive(k) for k in kids), "workers outlived the main process"
    first = [r["id"] for r in rows(out)]
    assert len(first) == len(set(first)) and all(r["status"] == "ok" for r in rows(out))
    assert 4 <= len(first) < 10
    result = run_sweep(sweep_file, out, workers=2, resume=True, write_page=False)
    ids = [r["id"] for r in rows(out)]
    assert sorted(ids) == sorted(p.id for p in result.sweep.points)     # every point once
    assert set(result.computed) == set(ids) - set(first) and result.reused == len(first)


@pytest.fixture
def finished(sweep_file, tmp_path):
    """An output folder of the sweep with 4 of its points (a run cut short)."""
    out = tmp_path / "finished"

    def stop(record, done, failed, remaining):
        if done == 4:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run_sweep(sweep_file, out, workers=1, progress=stop, write_page=False)
    return out


@pytest.mark.parametrize("damage,message", [
    (lambda b: b + b"\xff\xfe\x00garbage\n", "line 6 is not UTF-8 text (byte offset"),
    (lambda b: b.replace(b",ok,", b",ok?,", 1), "line 2 status 'ok?' is not one of ok, failed, error"),
    (lambda b: b.replace(b"\n", b"\nnot,a,row\n", 2).replace(b"\nnot,a,row\n", b"\n", 1),
     "line 3 has 3 cells, not 11"),
])
def test_a_damaged_csv_is_refused_and_left_as_it_is(sweep_file, finished, damage, message):
    csv_path = finished / "sweep.csv"
    csv_path.write_bytes(damage(csv_path.read_bytes()))
    before = csv_path.read_bytes()
    with pytest.raises(opspace.ConfigError, match="^" + f"{csv_path}: {message}".replace(
            "(", r"\(").replace(")", r"\)").replace("?", r"\?")):
        run_sweep(sweep_file, finished, workers=1, resume=True, write_page=False)
    assert csv_path.read_bytes() == before                  # byte for byte


def test_a_damaged_or_foreign_manifest_is_refused(sweep_file, finished, tmp_path):
    manifest = finished / "sweep.json"
    manifest.write_text("{ not json")
    csv_before = (finished / "sweep.csv").read_bytes()
    with pytest.raises(opspace.ConfigError, match=r"sweep\.json: is not valid JSON"):
        run_sweep(sweep_file, finished, workers=1, resume=True, write_page=False)
    manifest.write_text('{"tool": "something else"}')
    with pytest.raises(opspace.ConfigError, match=r"is not the manifest of an opspace sweep"):
        run_sweep(sweep_file, finished, workers=1, resume=True, write_page=False)
    assert (finished / "sweep.csv").read_bytes() == csv_before
    other = tmp_path / "other"
    other.mkdir()
    (other / "notes.txt").write_text("x")
    with pytest.raises(opspace.ConfigError, match=r"the directory is not a sweep's output \(no "
                                                  r"sweep\.json\)"):
        run_sweep(load_sweep(sweep_file), other, workers=1, resume=True, write_page=False)
    assert sorted(p.name for p in other.iterdir()) == ["notes.txt"]

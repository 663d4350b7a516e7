"""Design-space sweeps (opspace.sweep, `opspace sweep`).

The sweep is checked against the things outside it: a direct `opspace.size`
run of the same design point (bit for bit), a Dask LocalCluster against local
processes, SciPy's Latin hypercube and McKay, Beckman & Conover's strata
property, NumPy's linspace, and the definition of Pareto dominance.  Faults
are made on purpose: invalid points, a worker process killed mid-sweep, an
interrupted sweep resumed.  Points are sized with search off on a short duty
cycle at 50 Hz (about 0.15 s each) to keep the file fast.
"""

from __future__ import annotations

import csv
import os
import re
import shutil
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import opspace
from opspace.cli import main as cli_main
from opspace.report import sizing_summary
from opspace.sweep import (latin_hypercube, load_sweep, pareto_front, parse_figure, run_sweep)

REPO = Path(__file__).resolve().parent.parent
MARMOT = REPO / "models" / "marmot"

SHORT_CYCLE = """\
[cycle]
name = "short test cycle"
robot = "robot.toml"
catalogue = "drives.toml"
cycles_per_hour = 30
sample_rate = 50
service_factor = 1.2
arm_start = "stowed"

[[segment]]
kind = "straight"
label = "out"
distance = 3.0
speed = 1.2
acceleration = 0.6

[[segment]]
kind = "arm"
to = "side_reach"
duration = 3.0

[[segment]]
kind = "dwell"
duration = 0.5
payload = true

[[segment]]
kind = "arm"
to = "carry"
duration = 3.6                  # the lift peaks at 0.23 m/s (URDF limit 0.25)
payload = true

[[segment]]
kind = "straight"
label = "back"
distance = -3.0
speed = 1.0
acceleration = 0.6
payload = true
"""

FIGURES = """figures = [
    "stability.min_tip_over_margin",
    "max(wheels.peak_torque.*)",
    "wheels.rms_torque.left_wheel",
    "candidates[3].checks[0].drive_margin",
    "candidates[motor=M-60,gearbox=HS1 helical].checks[ratio=20].passed",
    "count(candidates[*].checks[*].passed)",
    "recommended.motor",
]"""


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """The demo robot, URDF and catalogue with a short duty cycle, in a temp dir."""
    d = tmp_path_factory.mktemp("sweep-files")
    for name in ("robot.toml", "arm.urdf", "drives.toml"):
        shutil.copy(MARMOT / name, d / name)
    (d / "short.toml").write_text(SHORT_CYCLE)
    return d


def write_sweep(directory, parameters, *, extra="", figures=FIGURES, name="sweep.toml"):
    path = Path(directory) / name
    path.write_text(f'[sweep]\nname = "test sweep"\nduty_cycle = "short.toml"\n{figures}\n'
                    f"{extra}\n{parameters}")
    return path


def read_csv(path):
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


BASIC = """
[[parameter]]
key = "robot.base.top_speed"
values = [1.5, 1.0]

[[parameter]]
key = "cycle.segment[label=out].speed"
values = [0.9, 1.1]
"""
# top_speed 1.0 with speed 1.1 is the one invalid combination: every value is
# valid on its own (so the sweep starts), that point fails and the sweep goes on


@pytest.fixture(scope="module")
def basic_run(files, tmp_path_factory):
    """The 4-point sweep BASIC run through the CLI on 2 local processes."""
    out = tmp_path_factory.mktemp("basic-out")
    path = write_sweep(files, BASIC, name="basic.toml")
    code = cli_main(["sweep", str(path), "-o", str(out), "--workers", "2", "-q"])
    return path, out, code


# ---------------------------------------------------------------- identity
def _direct_summary(files, tmp_path, top, speed):
    """summary.json figures of `opspace.size` on hand-edited copies of the files."""
    d = tmp_path / f"direct-{top}-{speed}"
    d.mkdir()
    for name in ("arm.urdf", "drives.toml"):
        shutil.copy(files / name, d / name)
    robot = (files / "robot.toml").read_text()
    robot, n = re.subn(r"(?m)^top_speed = 1\.5 ", f"top_speed = {top!r} ", robot)
    assert n == 1
    (d / "robot.toml").write_text(robot)
    cycle, n = re.subn(r"speed = 1\.2\n", f"speed = {speed!r}\n", SHORT_CYCLE)
    assert n == 1
    (d / "short.toml").write_text(cycle)
    return sizing_summary(opspace.size(d / "short.toml", search=False))


def test_point_figures_equal_a_direct_size_run_bit_for_bit(basic_run, files, tmp_path):
    # Identity between two paths through the pipeline (the check): the
    # sweep's worker (documents edited in memory, rewritten, cached robot, one
    # BLAS/OpenMP thread) against `opspace.size` on files edited by hand here.
    _, out, code = basic_run
    assert code == 0
    rows = [r for r in read_csv(out / "sweep.csv") if r["status"] == "ok"]
    assert len(rows) == 3
    for row in rows:
        top, speed = float(row["robot.base.top_speed"]), float(row["cycle.segment[label=out].speed"])
        s = _direct_summary(files, tmp_path, top, speed)
        cand = s["candidates"]
        expected = {
            "stability.min_tip_over_margin": s["stability"]["min_tip_over_margin"]["value"],
            "max(wheels.peak_torque.*)": max(v["value"] for v in s["wheels"]["peak_torque"].values()),
            "wheels.rms_torque.left_wheel": s["wheels"]["rms_torque"]["left_wheel"]["value"],
            "candidates[3].checks[0].drive_margin": cand[3]["checks"][0]["drive_margin"]["value"],
            "count(candidates[*].checks[*].passed)": sum(c["passed"] for x in cand
                                                         for c in x["checks"]),
        }
        for key, value in expected.items():
            assert float(row[key]) == value, key            # repr round trip: bit for bit
        helical = [x for x in cand if x["motor"] == "M-60" and x["gearbox"] == "HS1 helical"][0]
        check = [c for c in helical["checks"] if c["ratio"]["value"] == 20.0][0]
        assert row["candidates[motor=M-60,gearbox=HS1 helical].checks[ratio=20].passed"] == (
            "true" if check["passed"] else "false")
        assert row["verdict"] == s["status"]
        assert row["recommended.motor"] == s.get("recommended", {}).get("motor", "")


def test_a_failing_point_is_recorded_and_the_sweep_goes_on(basic_run):
    _, out, _ = basic_run
    rows = read_csv(out / "sweep.csv")
    assert len(rows) == 4 and len({r["id"] for r in rows}) == 4
    bad = [r for r in rows if r["status"] != "ok"]
    assert [(r["status"], float(r["robot.base.top_speed"]),
             float(r["cycle.segment[label=out].speed"])) for r in bad] == [("failed", 1.0, 1.1)]
    for r in bad:   # the loader's own message: file, segment, key, value, expectation
        assert "short.toml" in r["message"] and "speed = 1.1 m/s exceeds" in r["message"]
        assert "top_speed 1 m/s" in r["message"]
        assert r["verdict"] == "" and r["stability.min_tip_over_margin"] == ""
    html = (out / "sweep.html").read_text()
    assert html.count("data:image/png;base64,") == 3 and "did not size (1)" in html
    assert "verify" in html.lower() and "safety standards" in html
    assert "Best design in 3-D" in html


def test_the_page_draws_the_best_design_in_3d_offline(basic_run, tmp_path):
    from browser import open_view3d, require_browser

    require_browser()
    _, out, _ = basic_run
    view = open_view3d(out / "sweep.html", screenshot=tmp_path / "sweep.png")
    assert view.ok, view.problems()
    from browser import open_page, visible_text_problems
    text = open_page(out / "sweep.html", evaluate="document.body.innerText").evaluated
    assert not visible_text_problems(text)
    assert view.evaluated["frames"] == 1
    assert view.evaluated["drawn"] > 0.01 and view.evaluated["empty"] < 1e-3, view.evaluated


# ---------------------------------------------------------------- executors
@pytest.fixture(scope="module")
def dask_cluster():
    distributed = pytest.importorskip("distributed")
    import logging

    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       host="127.0.0.1", dashboard_address=None,
                                       silence_logs=logging.CRITICAL)
    yield cluster
    cluster.close()


def _comparable(records):
    return {r.id: (r.status, r.message, r.verdict, r.values, r.figures) for r in records}


def test_local_processes_and_a_dask_local_cluster_agree(basic_run, dask_cluster, tmp_path):
    path, out, _ = basic_run
    processes = run_sweep(path, out, resume=True, workers=1)   # every point read back
    assert processes.computed == () and processes.reused == 4
    dask = run_sweep(path, tmp_path / "dask", cluster=dask_cluster.scheduler_address)
    assert "Dask" in dask.executor and len(dask.computed) == 4
    assert _comparable(dask.records) == _comparable(processes.records)


def test_each_worker_loads_a_robot_once_per_content(files):
    from opspace.sweep import evaluate_point
    from opspace.sweep._engine import Context, Task
    from opspace.sweep._worker import _CACHE

    path = write_sweep(files, """
[[parameter]]
key = "robot.base.mass"
values = [44.0, 46.0]

[[parameter]]
key = "cycle.segment[label=back].speed"
values = [0.8, 0.9, 1.0]
""", name="cache.toml")
    sweep = load_sweep(path)
    context = Context(documents=sweep.documents, figures=sweep.figures, search=False)
    before = _CACHE.loads
    for p in sweep.points:          # the second parameter varies fastest
        rec = evaluate_point(context, Task(p.id, tuple(sweep.assignments(p))), worker=False)
        assert rec["status"] == "ok", rec["message"]
    # 6 points: 2 robots + 1 catalogue + 3 duty cycles loaded, not 6 of each
    assert _CACHE.loads - before == 2 + 1 + 3


def test_motor_choice_and_one_gear_ratio_equal_a_hand_edited_catalogue(files, tmp_path):
    from opspace.sweep import evaluate_point
    from opspace.sweep._engine import Context, Task

    path = write_sweep(files, """
[fixed]
"catalogue.gearbox" = "PL2 planetary"

[[parameter]]
key = "catalogue.motor"
values = ["M-40", "M-60"]

[[parameter]]
key = "catalogue.gearbox[name=PL2 planetary].ratios"
values = [16.0, 25.0]
""", name="choice.toml", figures='figures = ["candidates[0].motor", "candidates[0].checks[0].ratio", '
                                  '"candidates[0].checks[0].drive_margin", "count(candidates[*])"]')
    sweep = load_sweep(path)
    assert [p.action for p in sweep.parameters] == ["select", "one"]
    context = Context(documents=sweep.documents, figures=sweep.figures, search=False)
    point = next(p for p in sweep.points if p.values == {"catalogue.motor": "M-60", "catalogue."
                 "gearbox[name=PL2 planetary].ratios": 25.0})
    rec = evaluate_point(context, Task(point.id, tuple(sweep.assignments(point))), worker=False)
    f = rec["figures"]
    assert (f["candidates[0].motor"], f["candidates[0].checks[0].ratio"],
            f["count(candidates[*])"]) == ("M-60", 25.0, 1)
    # the same catalogue edited by hand: one motor, one gearbox family, one ratio
    text = (files / "drives.toml").read_text()
    blocks = text.split("[[")
    keep = [blocks[0]] + ["[[" + b for b in blocks[1:]
                          if 'name = "M-60"' in b or 'name = "PL2 planetary"' in b]
    edited = re.sub(r"ratios = \[[^\]]*\]", "ratios = [25.0]", "".join(keep))
    (tmp_path / "drives.toml").write_text(edited)
    result = opspace.size(files / "short.toml", catalogue=tmp_path / "drives.toml", search=False)
    check = result.sweeps[0].checks[0]
    from opspace.sizing import drive_margin
    assert (result.sweeps[0].motor, check.ratio, len(result.sweeps)) == ("M-60", 25.0, 1)
    assert f["candidates[0].checks[0].drive_margin"] == drive_margin(check)   # bit for bit


MANY = """
[fixed]
"cycle.sample_rate" = 40

[[parameter]]
key = "robot.payload.mass"
range = { start = 2.0, stop = 4.8, step = 0.4 }
"""


class _KillAfterFirst:
    """A progress callback that kills the worker process of the first record."""

    def __init__(self):
        self.killed = None

    def __call__(self, record, done, failed, remaining):
        if record is not None and self.killed is None:
            self.killed = int(record.worker.split("@")[0])
            assert self.killed != os.getpid()
            os.kill(self.killed, signal.SIGKILL)


@pytest.mark.parametrize("executor", ["processes", "dask"])
def test_a_worker_killed_mid_sweep_loses_no_point(executor, files, tmp_path, request):
    path = write_sweep(files, MANY, name=f"many-{executor}.toml")
    kill = _KillAfterFirst()
    where = ({"workers": 2} if executor == "processes"
             else {"cluster": request.getfixturevalue("dask_cluster").scheduler_address})
    result = run_sweep(path, tmp_path / "out", progress=kill, **where)
    rows = read_csv(tmp_path / "out" / "sweep.csv")
    n = len(result.sweep.points)
    assert n == 8 and kill.killed is not None
    assert len(rows) == n and len({r["id"] for r in rows}) == n        # each point once
    assert all(r["status"] == "ok" for r in rows)
    if executor == "processes":      # the broken pool was rebuilt, its points resubmitted
        assert result.retried >= 1
        assert str(kill.killed) not in {r["worker"].split("@")[0] for r in rows[1:]}


def test_resume_computes_only_the_missing_points(files, tmp_path):
    path = write_sweep(files, MANY, name="resume.toml")
    out = tmp_path / "out"

    def interrupt(record, done, failed, remaining):
        if done == 3:
            raise KeyboardInterrupt   # as Ctrl-C between two rows

    with pytest.raises(KeyboardInterrupt):
        run_sweep(path, out, workers=2, progress=interrupt)
    first = read_csv(out / "sweep.csv")
    assert len(first) == 3
    with open(out / "sweep.csv", "a") as fh:
        fh.write("0123456789abcdef,ok,half a row")    # killed while writing a row
    with pytest.raises(opspace.ConfigError, match="--resume"):
        run_sweep(path, out, workers=2)
    result = run_sweep(path, out, workers=2, resume=True)
    rows = read_csv(out / "sweep.csv")
    all_ids = {p.id for p in result.sweep.points}
    assert set(result.computed) == all_ids - {r["id"] for r in first}   # the missing ones only
    assert len(rows) == len(all_ids) == 8 and {r["id"] for r in rows} == all_ids
    assert result.reused == 3 and len(result.computed) == 5
    again = run_sweep(path, out, workers=2, resume=True)
    assert again.computed == () and len(read_csv(out / "sweep.csv")) == 8
    changed = write_sweep(files, MANY, name="resume.toml",
                          figures='figures = ["stability.min_tip_over_margin"]')
    with pytest.raises(opspace.ConfigError, match="different sweep"):
        run_sweep(changed, out, workers=2, resume=True)


# ---------------------------------------------------------------- sampling
LHS = """
[[parameter]]
key = "robot.base.mass"
random = { low = 40.0, high = 50.0 }

[[parameter]]
key = "robot.mount.xyz[0]"
random = { low = -0.05, high = 0.25 }

[[parameter]]
key = "cycle.cycles_per_hour"
values = [10.0, 20.0]
"""


@pytest.mark.parametrize("n, seed", [(7, 3), (30, 0)])
def test_latin_hypercube_covers_each_stratum_once(files, tmp_path, n, seed):
    path = write_sweep(files, LHS, extra=f"samples = {n}\nseed = {seed}", name=f"lhs-{n}.toml")
    sweep = load_sweep(path)
    assert len(sweep.points) == 2 * n              # factorial x Latin hypercube
    X = np.array([[p.values["robot.base.mass"], p.values["robot.mount.xyz[0]"]]
                  for p in sweep.points if p.values["cycle.cycles_per_hour"] == 10.0])
    lows, highs = np.array([40.0, -0.05]), np.array([50.0, 0.25])
    # McKay, Beckman & Conover, Technometrics 21(2) 1979, sec. 2: each of the
    # n equal strata of every input holds exactly one of the n points.
    strata = np.floor((X - lows) / (highs - lows) * n).astype(int)
    for k in range(2):
        assert sorted(strata[:, k]) == list(range(n))
    # SciPy's implementation (scipy.stats.qmc.LatinHypercube), same seed.
    from scipy.stats import qmc
    try:
        u = qmc.LatinHypercube(d=2, rng=np.random.default_rng(seed)).random(n)
    except TypeError:
        u = qmc.LatinHypercube(d=2, seed=np.random.default_rng(seed)).random(n)
    np.testing.assert_allclose(X, qmc.scale(u, lows, highs), rtol=0, atol=0)
    np.testing.assert_array_equal(latin_hypercube(n, lows, highs, seed), X)
    # the same hypercube at every grid value
    Y = np.array([[p.values["robot.base.mass"], p.values["robot.mount.xyz[0]"]]
                  for p in sweep.points if p.values["cycle.cycles_per_hour"] == 20.0])
    np.testing.assert_array_equal(X, Y)


def test_ranges_match_numpy_and_ids_are_stable(files, tmp_path):
    path = write_sweep(files, """
[[parameter]]
key = "robot.mount.xyz[0]"
range = { start = 0.0, stop = 0.3, step = 0.1 }

[[parameter]]
key = "catalogue.gearbox[name=PL2 planetary].efficiency"
range = { start = 0.8, stop = 0.95, num = 4 }
""", name="ranges.toml")
    sweep = load_sweep(path)
    a, b = sweep.parameters
    assert a.values == (0.0, 0.1, 0.2, 0.3)        # 12 significant digits: 0.30000000000000004 -> 0.3
    # numpy.linspace as the independent reference
    np.testing.assert_allclose(b.values, np.linspace(0.8, 0.95, 4), rtol=1e-12, atol=0)
    assert b.steps == (("key", "gearbox"), ("index", 0), ("key", "efficiency"))
    assert len(sweep.points) == 16 and len({p.id for p in sweep.points}) == 16
    # a point's id depends on its values only, not on the order of the parameters
    text = path.read_text()
    i = text.index("[[parameter]]", text.index("[[parameter]]") + 1)
    swapped = files / "ranges-swapped.toml"
    swapped.write_text(text[:text.index("[[parameter]]")] + text[i:] + "\n"
                       + text[text.index("[[parameter]]"):i])
    assert {p.id for p in load_sweep(swapped).points} == {p.id for p in sweep.points}


# ---------------------------------------------------------------- Pareto
def _dominated(P, i):
    """Deb, Multi-Objective Optimization Using Evolutionary Algorithms (2001),
    ch. 2 (definition recalled from memory): j dominates i if it is no worse
    in every objective and strictly better in one (minimisation)."""
    return any(np.all(P[j] <= P[i]) and np.any(P[j] < P[i]) for j in range(len(P)) if j != i)


@pytest.mark.parametrize("goals", [("min", "min"), ("min", "max"), ("max", "max")])
def test_pareto_front_matches_the_definition(goals):
    rng = np.random.default_rng(5)
    for trial in range(20):
        n = int(rng.integers(1, 40))
        P = rng.integers(0, 8, size=(n, 2)).astype(float)      # many ties on purpose
        if trial % 4 == 0:
            P[rng.integers(0, n)] = np.nan
        front = pareto_front(P[:, 0], P[:, 1], x_goal=goals[0], y_goal=goals[1])
        Q = P * [1 if g == "min" else -1 for g in goals]
        finite = np.flatnonzero(np.isfinite(Q).all(axis=1))
        Qf = Q[finite]
        expected = {int(finite[i]) for i in range(len(Qf)) if not _dominated(Qf, i)}
        assert set(front) == expected


# ---------------------------------------------------------------- paths
SUMMARY = {
    "status": "pass",
    "wheels": {"peak_torque": {"right_wheel": {"value": 4.0, "unit": "N·m"},
                               "left_wheel": {"value": 5.0, "unit": "N·m"}}},
    "candidates": [
        {"motor": "A", "gearbox": "G", "checks": [
            {"ratio": {"value": 10.0, "unit": "1"}, "passed": True},
            {"ratio": {"value": 20.0, "unit": "1"}, "passed": False}],
         "passing_ratios": {"value": [10.0], "unit": "1"}},
        {"motor": "B", "gearbox": "G", "checks": [
            {"ratio": {"value": 10.0, "unit": "1"}, "passed": True}]}],
}


@pytest.mark.parametrize("text, value, unit", [
    ("wheels.peak_torque.left_wheel", 5.0, "N·m"),
    ("max(wheels.peak_torque)", 5.0, "N·m"),
    ("min(wheels.peak_torque.*)", 4.0, "N·m"),
    ("sum(wheels.peak_torque.*)", 9.0, "N·m"),
    ("candidates[motor=B].checks[0].passed", True, None),
    ("candidates[motor=A,gearbox=G].checks[ratio=20].passed", False, None),
    ("count(candidates[*].checks[*].passed)", 2, "1"),
    ("count(candidates[*])", 2, "1"),
    ("count(wheels.peak_torque)", 2, "1"),
    ("candidates[0].passing_ratios[0]", 10.0, "1"),
    ("status", "pass", None),
])
def test_figure_paths(text, value, unit):
    assert parse_figure(text).evaluate(SUMMARY) == (value, unit)


@pytest.mark.parametrize("text, message", [
    ("wheels.peak_torque", "not a single figure"),
    ("wheels.peak_torqe.left_wheel", "no key 'peak_torqe'"),
    ("candidates[motor=G].checks", "names no entry"),
    ("candidates[5].motor", "has 2 entries"),
    ("candidates[gearbox=G].motor", "names 2 figures"),
])
def test_figure_path_errors_say_what_is_there(text, message):
    with pytest.raises(ValueError, match=re.escape(message)):
        parse_figure(text).evaluate(SUMMARY)


# ---------------------------------------------------------------- bad input
@pytest.mark.parametrize("parameter, expected", [
    ('key = "robot.base.mas"\nvalues = [1.0]', ["robot.base.mas", "robot.toml: [base] mas is not a "
                                                 "known key (valid keys: com,"]),
    ('key = "robot.bse.mass"\nvalues = [1.0]', ["robot.bse.mass", "[bse] is not a known table"]),
    ('key = "robot.bse.mass.x"\nvalues = [1.0]', ["robot.bse.mass.x", "no key 'bse'", "keys there"]),
    ('key = "robot.ground.frictio"\nvalues = [0.5]', ["robot.ground.frictio", "not a known key"]),
    ('key = "cycle.segment[99].speed"\nvalues = [1.0]', ["segment[99]", "5 entries"]),
    ('key = "robot.mount"\nvalues = [1.0]', ["robot.mount", "not a number", "a table"]),
    ('key = "robot.caster"\nvalues = [1.0]', ["robot.caster", "not a number"]),
    ('key = "cycle.segment[1].to"\nvalues = [1.0]', ["cycle.segment[1].to", "must be strings",
                                                      "1.0"]),
    ('key = "robot.robot.tool_frame"\nrange = {start = 0, stop = 1, step = 0.5}',
     ["tool_frame", "needs a number"]),
    ('key = "robot.mount.xyz"\nvalues = [0.1]', ["robot.mount.xyz", "list of 3 numbers", "xyz[0]"]),
    ('key = "robot.base.mass"\nvalues = []', ["robot.base.mass", "values", "non-empty", "[]"]),
    ('key = "robot.base.mass"\nvalues = [40.0, 40]', ["robot.base.mass", "more than once", "40.0"]),
    ('key = "robot.base.mass"\nvalues = [40.0, "heavy"]', ["robot.base.mass", "finite numbers",
                                                            "'heavy'"]),
    ('key = "robot.base.mass"\nrange = {start = 40, stop = 50, step = -1}',
     ["robot.base.mass", "range", "step = -1", "sign"]),
    ('key = "robot.base.mass"\nrange = {start = 40, stop = 50, step = 0}',
     ["robot.base.mass", "step must be a finite non-zero number, got 0"]),
    ('key = "robot.base.mass"\nrange = {start = 40, stop = 40, num = 3}',
     ["robot.base.mass", "empty", "start = stop = 40"]),
    ('key = "robot.base.mass"\nrange = {start = 40, stop = 50, num = 1}',
     ["robot.base.mass", "num must be an integer >= 2, got 1"]),
    ('key = "robot.base.mass"\nrange = {start = 40, stop = 50}', ["robot.base.mass", "step and num"]),
    ('key = "robot.base.mass"\nrandom = {low = 50, high = 40}\n', ["robot.base.mass", "low < high",
                                                                     "low = 50"]),
    ('key = "robot.base.mass"\nvalues = [40.0]\nrange = {start = 1, stop = 2, step = 1}',
     ["robot.base.mass", "exactly one of values, range, random"]),
    ('key = "catalogue.motor"\nvalues = ["M-60", "M-99"]', ["catalogue.motor", "'M-99'",
                                                          "names: M-20"]),
])
def test_bad_sweep_input_names_file_parameter_value(files, tmp_path, parameter, expected):
    extra = "samples = 4" if "random" in parameter else ""
    path = write_sweep(files, f"[[parameter]]\n{parameter}\n", name="bad.toml", extra=extra)
    with pytest.raises(opspace.ConfigError) as exc:
        load_sweep(path)
    message = str(exc.value)
    assert message.startswith("bad.toml: ") and "[[parameter]] 1" in message, message
    for part in expected:
        assert part in message, (part, message)


def test_bad_figure_is_found_before_any_point_is_sized(files, tmp_path):
    path = write_sweep(files, BASIC, name="bad-figure.toml",
                       figures='figures = ["stability.min_tip_over_margn"]')
    out = tmp_path / "out"
    with pytest.raises(opspace.ConfigError) as exc:
        run_sweep(path, out, workers=1)
    message = str(exc.value)
    assert "bad-figure.toml" in message and "min_tip_over_margn" in message
    assert "keys: criteria, min_tip_over_margin" in message
    assert not out.exists()


def test_a_worker_holds_pinocchio_and_blas_to_one_thread():
    # a fresh interpreter, as a worker process: the batch inverse dynamics must
    # ask Pinocchio for 1 thread there (`opspace.dynamics.set_batch_threads`)
    code = ("import threadpoolctl\n"
            "from opspace.dynamics import batch_threads\n"
            "from opspace.sweep._worker import _setup_worker\n"
            "_setup_worker()\n"
            "print(batch_threads(), max(i['num_threads'] for i in threadpoolctl.threadpool_info()))\n")
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert res.returncode == 0, res.stderr
    assert res.stdout.split() == ["1", "1"]


def test_missing_dask_is_a_clear_error(files, tmp_path, monkeypatch):
    path = write_sweep(files, BASIC, name="no-dask.toml")
    monkeypatch.setitem(sys.modules, "distributed", None)     # as if not installed
    with pytest.raises(opspace.ConfigError, match=re.escape("pip install 'opspace[cluster]'")):
        run_sweep(path, tmp_path / "out", local_cluster=2)
    assert not (tmp_path / "out").exists()


def test_cli_bad_sweep_prints_one_line_and_exits_2(files, tmp_path):
    path = write_sweep(files, '[[parameter]]\nkey = "robot.base.mass"\nvalues = []\n',
                       name="bad-cli.toml")
    out = tmp_path / "out"
    res = subprocess.run([sys.executable, "-m", "opspace", "sweep", str(path), "-o", str(out)],
                         capture_output=True, text=True, timeout=60)
    assert res.returncode == 2
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and "bad-cli.toml" in lines[0] and "robot.base.mass" in lines[0]
    assert not out.exists()


def test_demo_sweep_loads():
    sweep = load_sweep(MARMOT / "sweep.toml")
    assert len(sweep.points) == 36 and not sweep.search


def test_example_runs_quick(tmp_path):
    import runpy

    mod = runpy.run_path(str(REPO / "examples" / "sweep_gear_and_mount.py"))
    result = mod["main"](["--quick", "--workers", "2", "-o", str(tmp_path)])
    assert len(result.records) == 4 and all(r.ok for r in result.records)
    assert (tmp_path / "results" / "sweep.html").is_file()

"""Mutation battery: every key of every bundled input file, mutated by type,
run through the CLI entry point in-process (`opspace.cli.main`).

The files are found, not listed: every ``models/*/*.toml`` is classified by
its top-level tables (robot, duty cycle, catalogue, scenario, sweep) and
every key it holds is mutated, so a key added to a bundled file is covered
without editing this test.  Each case must end either

- refused: exit status 2, one line on stderr naming the file and the key,
  nothing on stdout, no output directory written; or
- accepted: only for mutations that can be valid values (the key missing
  when it has a default, 0, -1, text for free-text keys, inf for keys whose
  documented default is "no limit").

Never a traceback.  The computations themselves (sizing, the simulation's
preparation, the sweep's points) are replaced by a stub that stops the
command once everything was validated: the battery checks validation, and
runs in seconds.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import re
import shutil
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from opspace.cli import main as cli_main

REPO = Path(__file__).resolve().parent.parent
MODELS = REPO / "models"

DELETE = object()
MUTATIONS = {"missing": DELETE, "text": "text", "zero": 0, "minus_one": -1,
             "nan": math.nan, "inf": math.inf, "huge": 1e30, "list": [1.0, "x"],
             "table": {"x": 1}}
#: mutations that may be valid values of some keys (documented successes)
MAY_PASS = {"missing", "zero", "minus_one"}
FREE_TEXT = {"name", "label", "unit"}
UNLIMITED = {"top_speed", "torque_limit"}     # README: default "none" (no limit)
#: a sweep's figure paths are checked against the base design's summary,
#: which the stub does not size (`test_sweep` covers unknown figures)
FIGURE_KEYS = {"figure", "x", "y"}
URDF_VALUES = ("2,5", "0.04kg", "nan", "inf", "1e30", "")


class Accepted(BaseException):
    """Raised by the stubs where the computation would start."""


# ---------------------------------------------------------------- TOML writing
def _key(k):
    return k if re.fullmatch(r"[A-Za-z0-9_-]+", k) else json.dumps(k)


def _value(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return "nan" if math.isnan(v) else ("inf" if v == math.inf else
                                            "-inf" if v == -math.inf else repr(v))
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    return "{" + ", ".join(f"{_key(k)} = {_value(x)}" for k, x in v.items()) + "}"


def _is_table_array(v):
    return isinstance(v, list) and v and all(isinstance(e, dict) for e in v)


def dump_toml(doc, prefix=()):
    lines = []
    head = ".".join(_key(k) for k in prefix)
    scalars = {k: v for k, v in doc.items() if not isinstance(v, dict) and not _is_table_array(v)}
    if prefix and (scalars or not any(isinstance(v, dict) for v in doc.values())):
        lines.append(f"[{head}]")
    lines += [f"{_key(k)} = {_value(v)}" for k, v in scalars.items()]
    for k, v in doc.items():
        if isinstance(v, dict):
            lines += dump_toml(v, prefix + (k,))
        elif _is_table_array(v):
            for entry in v:           # an entry's tables are written inline
                lines.append(f"[[{'.'.join(_key(x) for x in prefix + (k,))}]]")
                lines += [f"{_key(x)} = {_value(y)}" for x, y in entry.items()]
    return lines


def write(path, doc):
    Path(path).write_text("\n".join(dump_toml(doc)) + "\n", encoding="utf-8")


# ---------------------------------------------------------------- the files
def _load(path):
    import tomllib

    return tomllib.loads(path.read_text(encoding="utf-8"))


def classify(path):
    """(kind, command builder) of a bundled TOML file, from its tables."""
    doc = _load(path)
    if "simulation" in doc:
        return "scenario"
    if "sweep" in doc:
        return "sweep"
    if "cycle" in doc:
        return "cycle"
    if "catalogue" in doc:
        return "catalogue"
    if "robot" in doc:
        return "robot"
    return None


def command(kind, path, out):
    """The CLI arguments exercising the file `path` of `kind`."""
    if kind == "robot":
        return ["check", str(path)]
    if kind == "cycle":
        return ["size", str(path), "-o", str(out), "-q", "--no-search"]
    if kind == "catalogue":
        cycles = sorted(p for p in path.parent.glob("*.toml") if classify(p) == "cycle")
        return ["size", str(cycles[0]), "--catalogue", str(path), "-o", str(out), "-q",
                "--no-search"] if cycles else None
    if kind == "scenario":
        return ["simulate", str(path), "-o", str(out), "-q", "--no-animation"]
    return ["sweep", str(path), "-o", str(out), "-q", "--workers", "1"]


def leaves(node, path=()):
    """Paths of the keys to mutate: every key of every table; of an array of
    tables, the first entry of each `kind` (or the first entry)."""
    if isinstance(node, dict):
        for k, v in node.items():
            if isinstance(v, dict):
                yield from leaves(v, path + (k,))
            elif _is_table_array(v):
                seen = set()
                for i, entry in enumerate(v):
                    kind = entry.get("kind")
                    if kind not in seen:
                        seen.add(kind)
                        yield from leaves(entry, path + (k, i))
            else:
                yield path + (k,)
                if isinstance(v, list) and v and all(isinstance(x, (int, float)) for x in v):
                    yield path + (k, 0)


def mutated(doc, path, value):
    import copy

    doc = copy.deepcopy(doc)
    node = doc
    for step in path[:-1]:
        node = node[step]
    if value is DELETE:
        del node[path[-1]]
    else:
        node[path[-1]] = value
    return doc


def key_name(path):
    return next(str(s) for s in reversed(path) if isinstance(s, str))


# ---------------------------------------------------------------- running
@pytest.fixture
def stubs(monkeypatch):
    """Stop each command where its computation would start."""
    import importlib

    from opspace.model import load_robot

    # the packages themselves (a function of the same name may shadow one)
    sizing, simulate, sweep = (importlib.import_module(f"opspace.{m}")
                               for m in ("sizing", "simulation", "sweep"))

    def stop(*args, **kwargs):
        raise Accepted

    class Run:        # the scenario's robot and poses, not the sampled plans
        def __init__(self, scenario, **kwargs):
            from opspace.description import resolve_pose

            robot = load_robot(scenario.robot_path)
            for key, value in (("[simulation] arm_start", scenario.arm_start),
                               ("[controller] posture", scenario.controller["posture"])):
                if value is not None:
                    resolve_pose(scenario, robot, value, key)
            raise Accepted

    monkeypatch.setattr(sizing, "size", stop)
    monkeypatch.setattr(simulate, "ScenarioRun", Run)
    monkeypatch.setattr(sweep, "run_sweep", stop)


def run(argv):
    """(outcome, exit code, stdout, stderr); outcome "refused", "accepted"
    (reached the stub, or exit 0), "crash: ..." (an exception escaped)."""
    out, err = io.StringIO(), io.StringIO()
    code = None
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = cli_main(argv)
            outcome = "accepted" if code == 0 else "refused"
        except Accepted:
            outcome = "accepted"
        except BaseException as exc:   # noqa: BLE001 -- any escape is the defect looked for
            outcome = f"crash: {type(exc).__name__}: {exc}"
    return outcome, code, out.getvalue(), err.getvalue()


def one_line_error(code, stdout, stderr, names):
    """'' when the refusal is one line naming every name, else what is wrong."""
    lines = stderr.strip().splitlines()
    if code != 2:
        return f"exit {code}"
    if stdout or len(lines) != 1 or "Traceback" in stderr:
        return f"not one line: {stderr!r} {stdout!r}"
    missing = [n for n in names if n not in lines[0]]
    return f"does not name {missing}: {lines[0]}" if missing else ""


@pytest.fixture
def models(tmp_path):
    """A copy of the bundled model folders (the files are mutated there)."""
    shutil.copytree(MODELS, tmp_path / "models")
    return tmp_path / "models"


def robot_urdf(robot):
    """(key, path) of the URDF a bundled robot description names: [robot]
    arm_urdf, or a whole robot's [robot] urdf (package:// through [package_paths])."""
    doc = _load(robot)
    key = "urdf" if "urdf" in doc["robot"] else "arm_urdf"
    rel = doc["robot"][key]
    if rel.startswith("package://"):
        pkg, _, rest = rel[len("package://"):].partition("/")
        rel = str(Path(doc["package_paths"][pkg]) / rest)
    return key, robot.parent / rel


def bundled(models):
    for path in sorted(models.glob("*/*.toml")):
        kind = classify(path)
        if kind is not None:
            yield path, kind


def test_every_key_of_every_bundled_file(models, stubs, tmp_path):
    problems, cases = [], 0
    out = tmp_path / "out"
    for path, kind in bundled(models):
        argv = command(kind, path, out)
        if argv is None:
            continue
        original = path.read_bytes()
        doc = _load(path)
        for key_path in leaves(doc):
            element = isinstance(key_path[-1], int)
            for name, value in MUTATIONS.items():
                if element and name not in ("nan", "huge", "text"):
                    continue
                cases += 1
                write(path, mutated(doc, key_path, value))
                outcome, code, stdout, stderr = run(argv)
                label = f"{path.name} {'.'.join(map(str, key_path))} = {name}"
                key = key_name(key_path)
                if outcome.startswith("crash"):
                    problems.append(f"{label}: {outcome}")
                elif outcome == "refused":
                    what = one_line_error(code, stdout, stderr, [path.name, key])
                    if what and name == "missing" and "is missing" in stderr:
                        what = ""         # another key of the table is needed instead
                    if what:
                        problems.append(f"{label}: {what}")
                    if out.exists():
                        problems.append(f"{label}: refused but wrote {out}")
                elif not (name in MAY_PASS or (name == "text" and (key in FREE_TEXT
                                                                   or key_path[0] == "labels"
                                                                   or key in FIGURE_KEYS))
                          or (name == "inf" and key in UNLIMITED)):
                    problems.append(f"{label}: accepted")
                shutil.rmtree(out, ignore_errors=True)
        path.write_bytes(original)
    assert cases > 500
    assert not problems, f"{len(problems)} of {cases} cases:\n" + "\n".join(problems)


# ---------------------------------------------------------------- encodings, paths
BROKEN_FILES = {
    "latin-1": lambda text: ("# caf\xe9 \n" + text).encode("latin-1", "replace"),
    "utf-16": lambda text: text.encode("utf-16"),
    "binary": lambda text: bytes(range(256)) * 4,
}


def _break_path(path, how):
    path.unlink()
    if how == "missing":
        return
    if how == "directory":
        path.mkdir()
    elif how == "loop":
        os.symlink(path.name, path)          # a link to itself
    elif how == "dangling":
        os.symlink("nowhere.toml", path)


@pytest.mark.parametrize("how", list(BROKEN_FILES) + ["missing", "directory", "loop", "dangling"])
def test_every_bundled_file_broken_as_a_whole(models, stubs, tmp_path, how):
    """Each bundled file (given on the command line, or referred to by
    another file: the robot by the cycle and the scenario, the URDF by the
    robot, the cycle by the sweep) unreadable as UTF-8 text or as a file."""
    out = tmp_path / "out"
    problems = []
    path_case = how not in BROKEN_FILES     # the cycle names the catalogue too: it may answer
    targets = [(p, command(k, p, out), ["catalogue"] if k == "catalogue" and path_case
                else [p.name]) for p, k in bundled(models)]
    for folder in {p.parent for p, _ in bundled(models)}:
        by_kind = {k: p for p, k in bundled(models) if p.parent == folder}
        for ref, kind in {"robot": "cycle", "urdf": "robot"}.items():
            if kind not in by_kind:
                continue
            referrer = by_kind[kind]
            if kind == "cycle":
                key, target = "[cycle] robot", folder / _load(referrer)["cycle"]["robot"]
            else:
                key, target = robot_urdf(referrer)
                key = f"[robot] {key}"
            targets.append((target, command(kind, referrer, out),
                            [referrer.name, key] if how in ("missing", "directory", "loop",
                                                            "dangling") else [target.name]))
    for path, argv, names in targets:
        if argv is None:
            continue
        original = path.read_bytes()
        if how in BROKEN_FILES:
            path.write_bytes(BROKEN_FILES[how](original.decode("utf-8")))
        else:
            _break_path(path, how)
        outcome, code, stdout, stderr = run(argv)
        what = outcome if outcome.startswith("crash") else one_line_error(code, stdout, stderr,
                                                                             names)
        if what:
            problems.append(f"{path.name} ({' '.join(argv[:1])}): {what}")
        if out.exists():
            problems.append(f"{path.name}: wrote {out}")
        if path.is_dir() and not path.is_symlink():
            path.rmdir()
        elif path.is_symlink():
            path.unlink()
        path.write_bytes(original)
    assert not problems, "\n".join(problems)


# ---------------------------------------------------------------- the URDF
def urdf_attributes(text):
    """(element path, attribute) of the first element of each kind that has
    a numeric attribute (joints and links, their children; not the shapes of
    <visual> and <collision>, which are for drawing only)."""
    root = ET.fromstring(text)
    seen = []
    for parent in root:
        drawn = {id(e) for v in list(parent.findall("visual")) + list(parent.findall("collision"))
                 for e in v.iter()}   # drawing only: a bad shape is a note (README, 3-D view)
        for el in [e for e in parent.iter() if id(e) not in drawn]:
            for attr, value in el.attrib.items():
                if re.fullmatch(r"[-+0-9.eE ]+", value.strip() or "x"):
                    key = (parent.tag, el.tag, attr, parent.get("type"))
                    if key not in [s[0] for s in seen]:
                        seen.append((key, parent.get("name"), el.tag, attr))
    return seen


def test_every_numeric_urdf_attribute(models, stubs):
    problems, cases = [], 0
    for robot, kind in bundled(models):
        if kind != "robot":
            continue
        urdf = robot_urdf(robot)[1]
        if urdf.suffix != ".urdf":
            continue
        text = urdf.read_text(encoding="utf-8")
        for (ptag, tag, attr, _), pname, _, _ in urdf_attributes(text):
            for value in URDF_VALUES + (None,):
                root = ET.fromstring(text)
                el = next(p for p in root.findall(ptag) if p.get("name") == pname)
                target = el if tag == ptag else el.find(f".//{tag}")
                if value is None:
                    del target.attrib[attr]
                else:
                    target.set(attr, value)
                urdf.write_text(ET.tostring(root, encoding="unicode"), encoding="utf-8")
                cases += 1
                outcome, code, stdout, stderr = run(["check", str(robot)])
                label = f"{urdf.name} {ptag} '{pname}' <{tag} {attr}> = {value!r}"
                if outcome.startswith("crash"):
                    problems.append(f"{label}: {outcome}")
                elif outcome == "refused":      # a removed attribute may break another file
                    what = one_line_error(code, stdout, stderr, [urdf.name] if value else [])
                    if what:
                        problems.append(f"{label}: {what}")
                elif value is not None:
                    problems.append(f"{label}: accepted")
        urdf.write_text(text, encoding="utf-8")
    assert cases > 50
    assert not problems, f"{len(problems)} of {cases}:\n" + "\n".join(problems)


# ---------------------------------------------------------------- the CLI's arguments
def test_bad_arguments_are_one_line_before_any_work(models, stubs, tmp_path):
    demo = models / "marmot"
    a_file = tmp_path / "a_file"
    a_file.write_text("x")
    cases = [
        (["size", str(demo / "shift.toml"), "-o", str(a_file)], ["-o", "not a directory"]),
        (["size", str(demo / "shift.toml"), "-o", str(a_file / "sub")], ["-o", "not a directory"]),
        (["simulate", str(demo / "pick.toml"), "--payload-error", "-2"], ["--payload-error", "-2"]),
        (["simulate", str(demo / "pick.toml"), "--payload-error", "nan"], ["--payload-error"]),
        (["simulate", str(demo / "pick.toml"), "--payload-error", "x"], ["--payload-error"]),
        (["simulate", "--integrator", "rk5"], ["--integrator", "rk5"]),
        (["sweep", str(demo / "sweep.toml"), "--workers", "0"], ["--workers", "got 0"]),
        (["sweep", str(demo / "sweep.toml"), "--workers", "-3"], ["--workers"]),
        (["sweep", str(demo / "sweep.toml"), "--local-cluster", "0"], ["--local-cluster"]),
        (["sweep", "--workers", "2", "--local-cluster", "2"], ["--workers"]),
        (["sweep", str(demo / "sweep.toml"), "--resume", "-o", str(demo)], ["--resume"]),
        (["check", str(tmp_path)], ["ROBOT", "directory"]),
        (["check", str(tmp_path / "nope.toml")], ["ROBOT", "not found"]),
        (["size", "--catalogue", str(tmp_path / "nope.toml")], ["--catalogue", "not found"]),
        (["size", "--bogus"], ["--bogus"]),
        (["frobnicate"], ["frobnicate"]),
    ]
    problems = []
    for argv, names in cases:
        outcome, code, stdout, stderr = run(argv)
        what = outcome if outcome.startswith("crash") else (
            "accepted" if outcome == "accepted" else one_line_error(code, stdout, stderr, names))
        if what:
            problems.append(f"{argv}: {what}")
    assert not problems, "\n".join(problems)
    assert a_file.read_text() == "x"


if __name__ == "__main__":      # a quick listing of the cases: python tests/test_mutations.py
    for p, k in bundled(MODELS):
        print(k, p.name, sum(1 for _ in leaves(_load(p))), file=sys.stderr)

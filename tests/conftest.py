"""Shared fixtures: the demo robot and small robots written on the fly."""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

import opspace

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "models" / "marmot" / "robot.toml"


def toml_value(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    return repr(float(v)) if isinstance(v, float) else str(v)


def write_toml(path, doc):
    """Write a description dict as TOML (tables, arrays of tables, scalars, lists)."""
    lines = []
    for key, table in doc.items():
        if isinstance(table, list):
            for entry in table:
                lines.append(f"[[{key}]]")
                lines += [f"{k} = {toml_value(v)}" for k, v in entry.items()]
            continue
        flat = {k: v for k, v in table.items() if not isinstance(v, dict)}
        lines.append(f"[{key}]")
        lines += [f"{k} = {toml_value(v)}" for k, v in flat.items()]
        for sub, subtable in table.items():
            if isinstance(subtable, dict):
                lines.append(f"[{key}.{sub}]")
                lines += [f"{k} = {toml_value(v)}" for k, v in subtable.items()]
    Path(path).write_text("\n".join(lines) + "\n")
    return Path(path)


def urdf_link(name, mass=None, com=(0, 0, 0), inertia=(0, 0, 0, 0, 0, 0)):
    if mass is None:
        return f'<link name="{name}"/>'
    ixx, iyy, izz, ixy, ixz, iyz = inertia
    return (f'<link name="{name}"><inertial><origin xyz="{com[0]} {com[1]} {com[2]}"/>'
            f'<mass value="{mass}"/><inertia ixx="{ixx}" iyy="{iyy}" izz="{izz}" '
            f'ixy="{ixy}" ixz="{ixz}" iyz="{iyz}"/></inertial></link>')


def urdf_joint(name, kind, parent, child, xyz=(0, 0, 0), axis=(0, 0, 1), effort=100.0,
               lower=-3.0, upper=3.0, damping=None, friction=None):
    s = (f'<joint name="{name}" type="{kind}"><parent link="{parent}"/><child link="{child}"/>'
         f'<origin xyz="{xyz[0]} {xyz[1]} {xyz[2]}"/>')
    if kind != "fixed":
        s += (f'<axis xyz="{axis[0]} {axis[1]} {axis[2]}"/>'
              f'<limit lower="{lower}" upper="{upper}" effort="{effort}" velocity="3"/>')
        if damping is not None or friction is not None:
            s += f'<dynamics damping="{damping or 0}" friction="{friction or 0}"/>'
    return s + "</joint>"


def urdf(*elements, name="test_arm"):
    return f'<?xml version="1.0"?>\n<robot name="{name}">\n' + "\n".join(elements) + "\n</robot>\n"


def urdf_elements(text):
    """A URDF's elements in document order as (tag, attributes), numbers parsed
    and rounded to 12 digits: two texts of one tree compare equal."""
    import xml.etree.ElementTree as ET

    def value(v):
        try:
            return tuple(round(float(x), 12) for x in v.split())
        except ValueError:
            return v
    return [(el.tag, {k: value(v) for k, v in el.attrib.items()})
            for el in ET.fromstring(text).iter() if el.tag != "robot"]


def base_doc(**overrides):
    """A valid description dict (the arm file is arm.urdf beside it)."""
    doc = {
        "robot": {"name": "test robot", "arm_urdf": "arm.urdf", "tool_frame": "tool"},
        "base": {"mass": 30.0, "com": [-0.04, 0.03, 0.2], "inertia": [1.1, 1.3, 1.6, 0.0, 0.0, 0.0],
                 "half_track": 0.25, "wheel_radius": 0.1},
        "wheel": {"mass": 1.5, "spin_inertia": 0.006, "diameter_inertia": 0.0035},
        "drive": {"rotor_inertia": 2e-5, "gear_ratio": 20.0, "efficiency": 0.9},
        "mount": {"xyz": [0.1, 0.0, 0.4], "rpy": [0.0, 0.0, 0.0]},
        "caster": [{"position": [0.3, 0.0]}, {"position": [-0.3, 0.0]}],
    }
    return with_overrides(doc, overrides)


def with_overrides(doc, overrides):
    """`doc` with `table__key=value` (one key) or `table=value` (a whole table) set."""
    for key, value in overrides.items():
        table, _, field = key.partition("__")
        if field:
            doc[table][field] = value
        else:
            doc[table] = value
    return doc


def two_link_urdf(m1=2.0, m2=1.5, l1=0.5, lc1=0.25, lc2=0.2, I1=0.03, I2=0.02,
                  damping=None, friction=None):
    """A two-link arm moving in the vertical x-z plane: axes −y, so a positive
    angle lifts the link from the horizontal (angles from the horizontal)."""
    inert = lambda I: (I, I, I, 0, 0, 0)  # noqa: E731  (isotropic: I about y)
    return urdf(
        urdf_link("root"),
        urdf_joint("shoulder", "revolute", "root", "link1", axis=(0, -1, 0),
                   damping=damping, friction=friction),
        urdf_link("link1", m1, (lc1, 0, 0), inert(I1)),
        urdf_joint("elbow", "revolute", "link1", "link2", xyz=(l1, 0, 0), axis=(0, -1, 0),
                   damping=damping, friction=friction),
        urdf_link("link2", m2, (lc2, 0, 0), inert(I2)),
        urdf_joint("tool_joint", "fixed", "link2", "tool", xyz=(0.4, 0, 0)),
        urdf_link("tool"),
    )


def make_robot(tmp_path, urdf_text=None, doc=None, name="robot.toml"):
    """Write arm.urdf + robot.toml into tmp_path and load them."""
    (tmp_path / "arm.urdf").write_text(urdf_text or two_link_urdf())
    path = write_toml(tmp_path / name, doc or base_doc())
    return opspace.load_robot(path)


def run_cli_module(*args, cwd=None):
    """Run `python -m opspace ARGS` in a subprocess; CompletedProcess."""
    import subprocess
    import sys
    return subprocess.run([sys.executable, "-m", "opspace", *args], capture_output=True,
                          text=True, cwd=cwd or REPO, timeout=300)


@pytest.fixture(scope="session")
def demo():
    return opspace.load_robot(DEMO)


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


def random_state(robot, rng, scale=1.0):
    """A random configuration inside the arm limits and a random velocity."""
    lo = np.where(np.isfinite(robot.lower), robot.lower, -np.pi)
    hi = np.where(np.isfinite(robot.upper), robot.upper, np.pi)
    q = robot.configuration(base_pose=rng.uniform(-2, 2, 3), wheels=rng.uniform(-3, 3, 2),
                            arm=rng.uniform(lo, hi))
    return q, scale * rng.normal(size=robot.nv)


PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def png_checked(fig, *, min_height):
    """Render; check the PNG signature, its width (~900 px) and a plausible size."""
    import struct

    from opspace.plots import figure_to_png_bytes
    data = figure_to_png_bytes(fig)
    assert data[:8] == PNG_SIGNATURE, "not a PNG stream"
    width, height = struct.unpack(">II", data[16:24])   # IHDR follows the signature
    assert 850 <= width <= 1000, f"figure is {width} px wide, the report expects ~900"
    assert min_height <= height <= 2000, f"figure is {height} px high"
    assert 10_000 < len(data) < 3_000_000, f"PNG of {len(data)} bytes: empty or bloated"
    return data


def mujoco_fall(robot, arm0, *, stops=None, seconds=1.0):
    """The arm's joint positions every 0.1 s of a fall from `arm0` (wheels held,
    no friction), by MuJoCo's RK4 at 0.1 ms on the robot's own URDF, with the
    same armature and gravity.  stops: None (limits off) or MuJoCo's joint-limit
    solref (the URDF limits as limited="true" constraints)."""
    mujoco = pytest.importorskip("mujoco")
    src = re.sub(r"<dynamics[^>]*/>", "", robot.description.arm_urdf.read_text())
    i = src.index(">", src.index("<robot")) + 1
    src = (src[:i] + '<mujoco><compiler discardvisual="false" fusestatic="false" '
           'balanceinertia="false"/></mujoco>' + src[i:])
    m = mujoco.MjModel.from_xml_string(src)
    if stops is None:
        m.jnt_limited[:] = 0
    else:
        assert m.jnt_limited.all()                     # limited="true" from the URDF
        m.jnt_solref[:] = stops
        m.jnt_solimp[:, :2] = (0.99, 0.99)
    m.dof_armature[:] = robot.armature[2:]
    m.opt.gravity[:] = (0.0, 0.0, -opspace.GRAVITY)
    m.opt.integrator = mujoco.mjtIntegrator.mjINT_RK4
    m.opt.timestep = 1e-4
    d = mujoco.MjData(m)
    d.qpos[:] = arm0
    ref = [d.qpos.copy()]
    for _ in range(int(round(seconds * 10))):
        for _ in range(1000):
            mujoco.mj_step(m, d)
        ref.append(d.qpos.copy())
    return np.array(ref)

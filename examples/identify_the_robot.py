"""Close the loop from the first hardware back into the model, on the demo rover.

    python examples/identify_the_robot.py [-o DIR] [--quick]

A "true" robot differs from the description the way a first build does: the
upper arm 20 % heavier and the forearm 15 % lighter than in CAD, the payload
3.6 kg instead of the rated 3.0 kg, more friction in the drives (0.26 instead
of 0.2 N·m) and at the elbow (1.3 N·m + 0.9 N·m·s/rad).  The example

1. designs an excitation on the description (`opspace excite`),
2. "runs" it on the true robot: the efforts of the true robot's inverse
   dynamics along the motion (ideal tracking) plus 0.05 N·m of noise, the
   payload held in the second period, written as a motion log,
3. identifies the robot from that log (`opspace identify`), and
4. sizes the drives on the description, the identified and the true robot,
   and prints the figures side by side: sizing on the identified robot
   matches sizing on the true one.

Everything here is invented (the Marmot rover is fictitious).  The figures are
model estimates: verify on hardware and follow the applicable safety standards.
"""

from __future__ import annotations

import argparse
import csv
import re
from pathlib import Path

import numpy as np

import opspace
from opspace import identify
from opspace.description import load_motion_log

HERE = Path(__file__).resolve().parent
DEMO = HERE.parent / "models" / "marmot"


def true_robot(out):
    """Write and load the 'true' robot (see the module docstring)."""
    d = out / "true"
    d.mkdir(parents=True, exist_ok=True)
    urdf = (DEMO / "arm.urdf").read_text()
    for link, k in (("upper_arm", 1.2), ("forearm", 0.85)):
        pat = re.compile(r'(<link name="%s".*?<mass value=")([^"]+)(")' % link, re.S)
        urdf = pat.sub(lambda m: m.group(1) + repr(float(m.group(2)) * k) + m.group(3), urdf,
                       count=1)
    (d / "arm.urdf").write_text(urdf)
    text = (DEMO / "robot.toml").read_text()
    for old, new in (("mass = 3.0  ", "mass = 3.6  "), ("coulomb = 0.2  ", "coulomb = 0.26 "),
                     ("[arm_joint.elbow]\n", "[arm_joint.elbow]\ncoulomb = 1.3\nviscous = 0.9\n")):
        text = text.replace(old, new, 1)
    (d / "robot.toml").write_text(text)
    return opspace.load_robot(d / "robot.toml")


def run_on(robot, motion, t, held, noise, seed=1):
    """Efforts of `robot` along the motion (its inverse dynamics) plus noise."""
    pos, vel, acc = motion
    tau = np.zeros_like(pos)
    with robot.kept():
        for flag in (False, True):
            robot.attach_payload() if flag else robot.detach_payload()
            idx = np.nonzero(held == flag)[0]
            qs = np.array([robot.configuration(wheels=p[:2], arm=p[2:]) for p in pos[idx]])
            tau[idx] = opspace.inverse_dynamics_batch(robot, qs, vel[idx], acc[idx])
    return tau + noise * np.random.default_rng(seed).normal(size=tau.shape)


def write_log(path, names, t, pos, tau, held):
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["time", *names, *(f"effort:{n}" for n in names), "payload"])
        for i in range(len(t)):
            w.writerow([f"{t[i]:.6f}", *(f"{x:.9g}" for x in pos[i]),
                        *(f"{x:.9g}" for x in tau[i]), int(held[i])])
    return path


def size_on(robot):
    from opspace.description import load_duty_cycle
    duty = load_duty_cycle(DEMO / "shift.toml", robot=robot)
    r = opspace.size(duty, robot=robot, search=False)
    rec = r.recommended
    peak = float(np.abs(r.evaluation.tau_out).max())
    k = robot.coordinate_names.index("shoulder_lift")
    return {"status": r.status, "peak_wheel_torque": peak,
            "peak_shoulder_torque": float(np.abs(r.evaluation.Q[:, k]).max()),
            "recommended": None if rec is None else f"{rec[1].motor} / {rec[1].gearbox} "
                                                    f"{rec[1].ratio:g}:1"}


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("-o", "--output", default="identify-example")
    ap.add_argument("--quick", action="store_true", help="a small search (the test suite's)")
    args = ap.parse_args(argv)
    out = Path(args.output)
    out.mkdir(parents=True, exist_ok=True)
    described = opspace.load_robot(DEMO / "robot.toml")
    true = true_robot(out)
    ex = identify.design_excitation(described, budget=20 if args.quick else 150,
                                    starts=2 if args.quick else 6)
    t = np.arange(0.0, 2 * ex.period, 0.002)
    held = t >= ex.period
    motion = ex.motion(t)
    tau = run_on(true, motion, t, held, noise=0.05)
    log = write_log(out / "run.csv", described.coordinate_names, t, motion[0], tau, held)
    from opspace.cli import main as cli
    code = cli(["identify", str(log), "--robot", str(DEMO / "robot.toml"), "--cutoff", "15",
                "-o", str(out / "identified-run")])
    assert code == 0
    identified = opspace.load_robot(out / "identified-run" / "identified" / "robot.toml")
    rows = {name: size_on(r) for name, r in (("description", described), ("identified", identified),
                                            ("true", true))}
    print(f"\nexcitation: condition number {ex.condition:.3g}; payload identified "
          f"{identified.description.payload.mass:.3f} kg (true 3.6 kg)")
    print(f"{'robot':<12} {'verdict':<8} {'peak wheel torque':>18} {'peak shoulder torque':>21}"
          f"  recommended drive")
    for name, r in rows.items():
        print(f"{name:<12} {r['status']:<8} {r['peak_wheel_torque']:>14.3f} N·m "
              f"{r['peak_shoulder_torque']:>17.2f} N·m  {r['recommended']}")
    return rows


if __name__ == "__main__":
    main()

"""Contact pre-check: effective masses, the two-body model, tracks, CLI, page.

Outside references are named beside each check.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from conftest import (DEMO, base_doc, make_robot, two_link_urdf, urdf, urdf_joint, urdf_link,
                      write_toml)

import opspace
from opspace import contact
from opspace.cli import main
from opspace.contact import ContactPointSpec

REGIONS = contact.load_regions()


def _lift_urdf(m_c=4.0, com_x=0.05, izz=0.07):
    """A vertical lift at the mount: its carriage moves along z only."""
    return urdf(urdf_link("root"),
                urdf_joint("lift", "prismatic", "root", "carriage", axis=(0, 0, 1),
                           lower=0.0, upper=0.5),
                urdf_link("carriage", m_c, (com_x, 0, 0.1), (0.05, 0.06, izz, 0, 0, 0)),
                urdf_joint("tool_joint", "fixed", "carriage", "tool", xyz=(0.1, 0, 0.2)),
                urdf_link("tool"))


def _gantry_urdf(m=(3.0, 2.0, 1.0)):
    """A Cartesian arm: x, y and z slides in series, each carrying the next
    (a slide of mass None is a massless link)."""
    I = (0.01, 0.01, 0.01, 0, 0, 0)

    def link(name, mass):
        return urdf_link(name) if mass is None else urdf_link(name, mass, (0, 0, 0), I)
    return urdf(urdf_link("root"),
                urdf_joint("sx", "prismatic", "root", "l1", axis=(1, 0, 0), lower=-0.2, upper=0.2),
                link("l1", m[0]),
                urdf_joint("sy", "prismatic", "l1", "l2", axis=(0, 1, 0), lower=-0.2, upper=0.2),
                link("l2", m[1]),
                urdf_joint("sz", "prismatic", "l2", "l3", axis=(0, 0, 1), lower=-0.2, upper=0.2),
                urdf_link("l3", m[2], (0, 0, 0), I),
                urdf_joint("tool_joint", "fixed", "l3", "tool"), urdf_link("tool"))


def test_gantry_effective_mass_is_the_carried_mass(tmp_path):
    # Newton's second law for slides in series: a force along z moves the last
    # slide only (m3), along y the last two, along x all three; the reflected
    # rotor inertia J G² of the z slide's drive adds to its axis (kg for a slide).
    # The planar base cannot move the tool vertically: along z the whole-body
    # mass is the base-locked one, and the rotor's share is J G² / (m3 + J G²).
    doc = base_doc(arm_joint={"sz": {"rotor_inertia": 1e-4, "gear_ratio": 100.0}})
    robot = make_robot(tmp_path, _gantry_urdf(), doc)
    q = robot.configuration(arm=[0.05, -0.1, 0.1])
    tool = ContactPointSpec("tool", "tool", (0, 0, 0))
    m_refl = 1e-4 * 100.0 ** 2
    for direction, expected in (((0, 0, 1), 1.0 + m_refl), ((0, 1, 0), 3.0), ((1, 0, 0), 6.0)):
        pm = contact.effective_masses(robot, q, tool, direction=direction, regions=REGIONS)
        np.testing.assert_allclose(pm.base_locked, expected, rtol=1e-10)
    pm = contact.effective_masses(robot, q, tool, direction=(0, 0, 1))
    np.testing.assert_allclose(pm.whole_body, 1.0 + m_refl, rtol=1e-10)
    np.testing.assert_allclose(pm.rotor_share, m_refl / (1.0 + m_refl), rtol=1e-9)
    # the hand estimate: half the moving mass plus the payload (ISO/TS 15066 Annex A)
    np.testing.assert_allclose(pm.simple_arm, 0.5 * 6.0, rtol=1e-12)
    np.testing.assert_allclose(pm.simple, 0.5 * robot.total_mass(), rtol=1e-12)


def test_point_mass_is_isotropic(tmp_path, rng):
    # A point mass moved freely in space: Λ = m I, so m_u = m along every
    # direction (Newton).  Two massless slides carry the third, which holds the
    # mass at the tool point.
    robot = make_robot(tmp_path, _gantry_urdf((None, None, 2.5)))
    q = robot.configuration(arm=[0.1, 0.0, -0.1])
    tool = ContactPointSpec("tool", "tool", (0, 0, 0))
    for _ in range(5):
        pm = contact.effective_masses(robot, q, tool, direction=rng.normal(size=3))
        np.testing.assert_allclose(pm.base_locked, 2.5, rtol=1e-10)


def test_two_link_tip_effective_mass_closed_form(tmp_path):
    # Khatib, "Inertial properties in robotic manipulation: an object-level
    # framework", IJRR 14(1), 1995: m_u = 1/(uᵀ J M⁻¹ Jᵀ u), with M of the planar
    # elbow arm (Spong, Hutchinson & Vidyasagar, Robot Modeling and Control,
    # 2006, eq. 7.87) and its tip Jacobian; angles from the horizontal.
    m1, m2, l1, lc1, lc2, I1, I2, l2 = 2.0, 1.5, 0.5, 0.25, 0.2, 0.03, 0.02, 0.4
    robot = make_robot(tmp_path, two_link_urdf(m1, m2, l1, lc1, lc2, I1, I2))
    tool = ContactPointSpec("tool", "tool", (0, 0, 0))
    for t1, t2 in ((0.3, 0.9), (-0.4, 1.7), (1.1, -0.6)):
        c2 = math.cos(t2)
        M = np.array([[m1 * lc1**2 + m2 * (l1**2 + lc2**2 + 2 * l1 * lc2 * c2) + I1 + I2,
                       m2 * (lc2**2 + l1 * lc2 * c2) + I2],
                      [m2 * (lc2**2 + l1 * lc2 * c2) + I2, m2 * lc2**2 + I2]])
        s1, s12, c1, c12 = math.sin(t1), math.sin(t1 + t2), math.cos(t1), math.cos(t1 + t2)
        J = np.array([[-l1 * s1 - l2 * s12, -l2 * s12], [l1 * c1 + l2 * c12, l2 * c12]])  # x, z
        Linv = J @ np.linalg.solve(M, J.T)
        q = robot.configuration(arm=[t1, t2])
        for u2 in ((1.0, 0.0), (0.0, 1.0), (0.6, 0.8)):
            u = np.array(u2)
            pm = contact.effective_masses(robot, q, tool, direction=(u[0], 0.0, u[1]))
            np.testing.assert_allclose(pm.base_locked, 1.0 / (u @ Linv @ u), rtol=1e-9)
        # along y the planar arm cannot move the tip: no finite mass
        assert math.isinf(contact.effective_masses(robot, q, tool, direction=(0, 1, 0)).base_locked)


def test_base_point_whole_body_mass_planar_closed_form(tmp_path):
    # A planar rigid body with the robot's mass centre on the x axis (y_c = 0):
    # in (v, ω) the kinetic energy is diagonal, ½ m_x v² + ½ I_ψ ω² with the
    # wheels' spin J = J_s + J_m G² adding J/r² per wheel to m_x and J b²/r² to
    # I_ψ (Lagrange's equations; parallel-axis theorem, Meriam & Kraige,
    # Engineering Mechanics: Dynamics).  A point at lateral offset y moves along
    # x at v − ω y, so 1/m_u = 1/m_x + y²/I_ψ.
    doc = base_doc(base__com=[-0.04, 0.0, 0.2])
    robot = make_robot(tmp_path, _lift_urdf(), doc)
    b, r = 0.25, 0.1
    J = 0.006 + 2e-5 * 20.0**2
    m_base, m_w, m_c = 30.0, 1.5, 4.0
    m_x = m_base + 2 * m_w + m_c + 2 * J / r**2
    x_c = 0.1 + 0.05                                 # mount x + carriage COM x
    I_psi = (1.6 + m_base * 0.04**2 + 2 * (0.0035 + m_w * b**2) + 0.07 + m_c * x_c**2
             + 2 * J * b**2 / r**2)
    q = robot.configuration(arm=[0.2])
    for y in (0.0, 0.2, -0.3):
        spec = ContactPointSpec("p", "base", (0.3, y, 0.15))
        pm = contact.effective_masses(robot, q, spec, direction=(1, 0, 0))
        np.testing.assert_allclose(pm.whole_body, 1.0 / (1.0 / m_x + y**2 / I_psi), rtol=1e-10)
        assert math.isinf(pm.base_locked)         # wheels locked: the base cannot move


def test_whole_body_never_heavier_than_base_locked(demo, rng):
    # Adding degrees of freedom (the base) can only lower the effective mass:
    # Λ⁻¹ grows by the base's positive semi-definite term (Khatib 1995, the
    # macro/mini structure).  Random states and directions of the demo robot.
    tool = ContactPointSpec("tool", "tool", (0.0, 0.0, 0.02))
    elbow = ContactPointSpec("elbow", "forearm", (0.05, 0.0, 0.0))
    lo, hi = demo.lower, demo.upper
    for _ in range(12):
        q = demo.configuration(arm=rng.uniform(lo, hi))
        u = rng.normal(size=3)
        for spec in (tool, elbow):
            pm = contact.effective_masses(demo, q, spec, direction=u)
            assert pm.whole_body <= pm.base_locked * (1 + 1e-9)


def test_two_body_model_hand_case():
    # ISO/TS 15066:2016 Annex A: μ = (1/m_H + 1/m_R)⁻¹, v = F_T/√(μ k), and at v
    # the spring energy F²/(2k) equals ½ μ v².  Hands and fingers (bundled
    # table, from memory): F_s = 140 N, factor 2, k = 75 N/mm, m_H = 0.6 kg.
    hand = REGIONS.get("hand_fingers")
    m_R = 5.0
    mu = 1.0 / (1.0 / 0.6 + 1.0 / 5.0)               # 0.535714... kg
    v = 280.0 / math.sqrt(mu * 75.0e3)               # 1.39688... m/s (by hand)
    np.testing.assert_allclose(contact.reduced_mass(0.6, m_R), mu, rtol=1e-15)
    np.testing.assert_allclose(contact.permissible_speed(hand, m_R), v, rtol=1e-12)
    np.testing.assert_allclose(v, 1.39688, rtol=1e-5)
    np.testing.assert_allclose(contact.contact_energy(280.0, 75.0e3), 0.5 * mu * v**2, rtol=1e-12)
    # pressure form: p_T A = 2 · 190 N/cm² · 0.5 cm² = 190 N < 280 N rules
    np.testing.assert_allclose(contact.permissible_force(hand, area=0.5e-4), 190.0, rtol=1e-12)
    np.testing.assert_allclose(contact.permissible_force(hand, area=2e-4), 280.0, rtol=1e-12)
    # an immovable robot: μ = m_H
    assert contact.reduced_mass(0.6, math.inf) == 0.6
    # transient contact not permitted (face): no speed is permissible
    assert contact.permissible_speed(REGIONS.get("face"), 10.0) == 0.0


def test_track_of_a_straight_drive(tmp_path):
    # Driving straight at v with the arm still: a base point moves at v along
    # x, its use is v / v_max(m_x) (arithmetic on the closed form above).
    doc = base_doc(base__com=[-0.04, 0.0, 0.2])
    robot = make_robot(tmp_path, _lift_urdf(), doc)
    spec = ContactPointSpec("front", "base", (0.4, 0.0, 0.2), region="lower_leg")
    v, r = 0.8, 0.1
    n = 50
    t = np.linspace(0.0, 2.0, n)
    qs = np.array([robot.configuration(base_pose=(v * ti, 0.0, 0.0), arm=[0.1]) for ti in t])
    nu = np.tile([v / r, v / r, 0.0], (n, 1))
    track = contact.contact_track(robot, qs, nu, [spec], REGIONS, t=t)
    m_x = contact.effective_masses(robot, qs[0], spec, direction=(1, 0, 0)).whole_body
    expected = v / contact.permissible_speed(REGIONS.get("lower_leg"), m_x)
    np.testing.assert_allclose(track.speed[:, 0], v, rtol=1e-12)
    np.testing.assert_allclose(track.use[:, 0], expected, rtol=1e-10)
    assert track.status == ("exceeded" if expected > 1 else "within")
    w = track.worst()[0]
    assert w["region"] == "lower_leg" and w["use"] == pytest.approx(expected, rel=1e-10)


def test_height_rule_picks_the_most_restrictive_region():
    # the rule documented in body_regions.toml: among the regions whose height
    # band holds the point, the lowest permissible speed
    z, m_R = 1.0, 8.0
    cands = REGIONS.at_height(z)
    assert {r.name for r in cands} >= {"abdomen", "pelvis", "hand_fingers"}
    from opspace.contact._points import _region_speed
    region, v = _region_speed(REGIONS, ContactPointSpec("p", "base", (0, 0, 0)), z, m_R)
    assert v == min(contact.permissible_speed(r, m_R) for r in cands)
    assert _region_speed(REGIONS, ContactPointSpec("p", "base", (0, 0, 0)), 2.5, m_R) == (None, None)


def test_cli_contact_demo_writes_page_json_csv(tmp_path, capsys):
    out = tmp_path / "out"
    code = main(["contact", str(DEMO), "--pose", "carry", "--speed", "0.1", "-o", str(out)])
    text = capsys.readouterr().out
    assert code == 0, text
    assert text.startswith("WITHIN")
    d = json.loads((out / "contact.json").read_text())
    names = [p["name"] for p in d["at_pose"]]
    assert names == ["tool", "elbow", "front_left_corner", "front_right_corner"]
    assert d["regions"]["from_memory"] is True
    assert "inf" not in (out / "contact.json").read_text().lower().replace("info", "")
    rows = (out / "contact.csv").read_text().splitlines()
    assert len(rows) == 2 + 4
    # a speed above a permissible one: exit 1 and the status says so
    code = main(["contact", str(DEMO), "--speed", "1.5", "--region", "lower_leg",
                 "-o", str(tmp_path / "o2")])
    assert code == 1
    assert capsys.readouterr().out.startswith("EXCEEDED")


def test_contact_page_in_a_browser(tmp_path):
    from browser import open_page, require_browser
    require_browser()
    out = tmp_path / "page"
    assert main(["contact", str(DEMO), "--pose", "carry", "--map", "--samples", "200",
                 "-o", str(out)]) == 0
    view = open_page(out / "contact.html", wait_for="img", screenshot=tmp_path / "contact.png")
    assert view.ok, view.problems()


def _bad(tmp_path, capsys, argv):
    code = main(argv)
    err = capsys.readouterr().err.strip()
    assert code == 2, err
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    return err


def test_bad_contact_inputs_one_line(tmp_path, capsys):
    (tmp_path / "arm.urdf").write_text(two_link_urdf())
    doc = base_doc(contact_point=[{"name": "hand", "frame": "nowhere"}])
    path = write_toml(tmp_path / "robot.toml", doc)
    err = _bad(tmp_path, capsys, ["contact", str(path), "-o", str(tmp_path / "o")])
    assert "robot.toml: [[contact_point]] 1 'hand' frame = 'nowhere'" in err
    doc = base_doc(contact_point=[{"name": "hand", "frame": "tool", "direction": [0, 0, 0]}])
    write_toml(path, doc)
    err = _bad(tmp_path, capsys, ["contact", str(path), "-o", str(tmp_path / "o")])
    assert "direction must have a non-zero length" in err
    doc = base_doc(contact_point=[{"name": "hand", "frame": "tool", "region": "elbowz"}])
    write_toml(path, doc)
    err = _bad(tmp_path, capsys, ["contact", str(path), "-o", str(tmp_path / "o")])
    assert "unknown body region 'elbowz'" in err and "hand_fingers" in err
    for key, value, expect in (("spring_constant", 0.0, "must be > 0 N/m"),
                               ("force", -5.0, "must be > 0 N")):
        table = tmp_path / f"regions_{key}.toml"
        write_toml(table, {"region": [{"name": "r", "spring_constant": 1e4, "mass": 3.0,
                                       "force": 100.0, "pressure": 1e6, key: value}]})
        err = _bad(tmp_path, capsys, ["contact", str(DEMO), "--regions", str(table),
                                      "-o", str(tmp_path / "o")])
        assert f"regions_{key}.toml: [[region]] 1 'r' {key} {expect}" in err
    assert not (tmp_path / "o").exists()
    assert main(["contact", str(DEMO), "--speed", "nan"]) == 2
    assert "--speed: must be within 0..20 m/s" in capsys.readouterr().err

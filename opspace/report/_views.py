"""The 3-D view of each report page, one call per page: which configurations
to show, with which markers (`_scene3d` draws them).  Placements come from
the robot model; nothing physical is computed here."""

from __future__ import annotations

import numpy as np

from ._scene3d import Marker, robot_scene, scene_html

__all__ = ["design_view", "simulation_view", "sizing_view"]

_PAYLOAD, _COM = "#CC79A7", "#D55E00"
#: most frames an animation keeps (the page stays small enough to mail)
MAX_FRAMES = 150


def _at_origin(q):
    """The configuration with the base moved to the world origin, heading 0
    (the pose pages show every pose in the same place)."""
    q = np.array(q, float)
    q[:4] = (0.0, 0.0, 1.0, 0.0)
    return q


def _payload_size(robot):
    r = robot.wheel_radius
    return float(np.clip(0.6 * r, 0.02, 0.12))


def sizing_view(result):
    """HTML block: the robot at each worst-case arm pose found by the search
    (with the rated payload) and at the cycle's instant of least tip-over
    margin, over the support polygon, with the COM's ground projection."""
    robot, ev = result.robot, result.evaluation
    st = ev.stability
    j = int(np.argmin(st.margin))
    cases = []
    for wp, what in ((result.worst_torque, "peak wheel torque"),
                     (result.worst_tip, "least tip-over margin"),
                     (result.worst_traction, "highest traction use")):
        if wp is not None:
            q = robot.configurations(np.asarray(wp.q)[None])[0]
            cases.append((f"worst case: {what}", q, robot.description.payload is not None))
    cases.append((f"cycle at t = {ev.t[j]:.2f} s (least margin)", _at_origin(ev.qs[j]),
                  bool(ev.payload[j])))
    payload = robot.description.payload
    com, held = [], []
    with robot.kept():
        for _, q, carried in cases:
            robot.detach_payload()
            if carried:
                robot.attach_payload()
            c = robot.com(q)
            com.append((c[0], c[1], 0.0))
            held.append(robot.frame_placement(q, robot.tool_frame).act(np.array(payload.com))
                        if carried else np.full(3, np.nan))
    markers = [Marker("COM on the ground", "sphere", 0.25 * robot.wheel_radius, _COM,
                      np.array(com))]
    if payload is not None:
        markers.append(Marker("payload", "box", _payload_size(robot), _PAYLOAD, np.array(held)))
    scene = robot_scene(robot, [q for _, q, _ in cases], labels=[c[0] for c in cases],
                        title=f"{robot.name}: worst cases", support=st.polygon.vertices,
                        markers=markers)
    return scene_html(scene, "The robot at each worst-case arm pose of the search and at the "
                             "cycle's instant of least tip-over margin (base at the origin), "
                             "over the support polygon (green); the orange dot is the centre "
                             "of mass on the ground, the pink box the payload (its size is "
                             "symbolic).")


def _frames(n, max_frames=MAX_FRAMES):
    """Indices of at most max_frames samples of n, evenly spread, the last kept."""
    every = max(1, -(-(n - 1) // max(max_frames - 1, 1)))
    idx = list(range(0, n, every))
    if idx[-1] != n - 1:
        idx.append(n - 1)
    return idx


def simulation_view(run, result):
    """HTML block: the run animated with a time slider; the payload where it
    waits, rides on the tool and is left; the tool's target."""
    robot, sc = run.robot, run.scenario
    t = np.asarray(result.t, float)
    idx = _frames(len(t))
    held = np.asarray(result.payload, bool)
    payload = next((e.payload for e in run.events if e.kind == "pick"), None)
    place = np.full((len(idx), 3), np.nan)
    if payload is not None:
        last = None if sc.payload_position is None else np.asarray(sc.payload_position, float)
        for k, i in enumerate(idx):
            if held[i]:
                last = robot.frame_placement(result.q[i], robot.tool_frame).act(
                    np.asarray(payload.com, float))
            place[k] = np.nan if last is None else last
    target = np.asarray(result.target_position, float)[idx]
    markers = [Marker("tool target", "sphere", 0.18 * robot.wheel_radius, "#0072B2", target)]
    if payload is not None:
        markers.append(Marker("payload", "box", _payload_size(robot), _PAYLOAD, place))
    support = None if result.stability is None else result.stability.polygon.vertices
    scene = robot_scene(robot, result.q[idx], labels=[f"t = {t[i]:.2f} s" for i in idx],
                        times=t[idx], title=f"{sc.name}", support=support, markers=markers)
    return scene_html(scene, f"The run in 3-D ({len(idx)} of {len(t)} samples): the blue dot "
                             f"is the tool's target, the pink box the payload (its size is "
                             f"symbolic); the support polygon (green) moves with the base.")


def design_view(robot, *, label, caption, shapes=None):
    """HTML block: one robot (e.g. a sweep's best design) in its neutral pose,
    over its support polygon (`opspace.stability.support_polygon`).  shapes: the
    URDF's `UrdfShapes` when its file is not at robot.description.arm_urdf."""
    from ..stability import support_polygon

    polygon = support_polygon([c.position for c in robot.contacts])
    scene = robot_scene(robot, [robot.neutral()], labels=[label], title=robot.name,
                        support=polygon.vertices, shapes=shapes)
    return scene_html(scene, caption)

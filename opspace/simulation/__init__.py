"""Fixed-step simulation of the reduced dynamics with a sampled controller.

State (q, ν): q the full Pinocchio configuration, ν the reduced velocity.  The
plant is

    M(q) ν̇ = Q − c(q, ν) − g(q) − f(q, ν)          (see `opspace.dynamics`)

with Q held constant between controller samples (zero-order hold at the
control period, a multiple of the step).  Coordinates can be held still
(`locked`): their rates stay zero and the others obey the free block
M_ff ν̇_f = (Q − c − g − f)_f.

Integrators (the configuration always advances on the manifold with
`pinocchio.integrate`, never q + v dt):

- ``"rk4"`` (default): the classical fourth-order Runge–Kutta scheme on
  (q, ν), stage configurations q_i = q ⊕ c_i h S ν_{i−1}, and
  q⁺ = q ⊕ h S (ν₁ + 2ν₂ + 2ν₃ + ν₄)/6.  Global error O(h⁴) on the arm and
  wheel coordinates (Hairer, Nørsett & Wanner, Solving ODEs I, 1993, II.1);
  the base pose enters no dynamic term (the dynamics are invariant to it),
  so its lower-order composition error cannot feed back.
- ``"euler"``: semi-implicit (symplectic) Euler, ν⁺ = ν + h ν̇(q, ν),
  q⁺ = q ⊕ h S ν⁺ (first order).

Rolling resistance uses the static contact loads at the start of each step
(the centre of mass moves negligibly within one step).

Payload events change the tool body's inertia at an instant.  Pick: a soft,
perfectly plastic catch of a payload at rest in the world: the generalized
momentum of robot and payload is kept, M⁺ ν⁺ = M⁻ ν⁻ (the payload brings no
momentum), so the robot slows slightly.  Release: the payload leaves with the
tool's velocity, ν⁺ = ν⁻ (the remaining system keeps its own momentum).

Blow-up detection stops the run with a `SimulationError` that names the time
and the cause and carries the partial result: a non-finite state, a demanded
effort beyond `blowup` times its limit, or a mass matrix that is not positive
definite.
"""

from __future__ import annotations

from ._agreement import Agreement, compare_runs
from ._loop import simulate
from ._result import PayloadEvent, SimulationError, SimulationResult
from ._scenario import ScenarioRun, run_scenario

__all__ = ["Agreement", "PayloadEvent", "ScenarioRun", "SimulationError", "SimulationResult",
           "compare_runs", "run_scenario", "simulate"]

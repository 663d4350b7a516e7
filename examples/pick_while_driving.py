"""The demo rover passes a shelf at walking pace and lifts a tote (what
`opspace simulate` does, from Python).

    python examples/pick_while_driving.py [-o DIR] [--quick]

Runs the bundled scenario models/marmot/pick.toml (invented) with the perfect
model, then again with a 10 % payload-mass error in the controller's model,
prints the tracking and effort figures, and writes the time series, figures,
the animation and report.html (one page with all of them).  `--quick` skips
the second run and the animation.

Simulation results are model estimates: verify on hardware, and follow the
applicable safety standards for mobile robots and manipulators.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from opspace.description import load_scenario
from opspace.report import simulation_text, write_simulation_outputs
from opspace.simulation import ScenarioRun

SCENARIO = Path(__file__).resolve().parent.parent / "models" / "marmot" / "pick.toml"


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("-o", "--output", default="pick-while-driving-out")
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args(argv)

    scenario = load_scenario(SCENARIO)
    run = ScenarioRun(scenario)
    result = run.run()
    compare = None
    if not args.quick:
        compare = (0.10, ScenarioRun(scenario, payload_mass_error=0.10).run())
    print(simulation_text(run, result, compare=compare))
    paths = write_simulation_outputs(run, result, args.output, compare=compare,
                                     animate=not args.quick)
    print("written:", ", ".join(sorted(p.name for p in paths.values())))
    return result


if __name__ == "__main__":
    main()

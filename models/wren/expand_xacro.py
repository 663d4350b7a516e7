"""Write urdf/wren.urdf, the expansion of urdf/wren.urdf.xacro (the Wren demo
robot; fictitious, invented for the opspace demo).

    python models/wren/expand_xacro.py        # needs: pip install 'opspace[xacro]'

Run it after changing the xacro files; tests/test_wren.py checks that the two
agree.  The package wren_description is this folder (as in robot.toml's
[package_paths]).
"""

import os
from pathlib import Path

from opspace.description import expand_xacro

HERE = Path(__file__).resolve().parent


def main():
    os.chdir(HERE / "urdf")          # xacro's banner names the file as given: keep it relative
    text = expand_xacro(Path("wren.urdf.xacro"), {"wren_description": HERE}, pretty=True)
    Path("wren.urdf").write_text(text, encoding="utf-8")
    print(f"wrote {HERE.name}/urdf/wren.urdf ({len(text)} characters)")


if __name__ == "__main__":
    main()

"""Build hook: compile opspace._kernel, the simulation's inner loop, in C++.

The kernel is built against the Pinocchio, eigenpy and Boost.Python of the
`pin` wheel in the build environment (headers and libraries under its
``cmeel.prefix``) and Eigen's headers from `cmeel-eigen`.  It is optional: if
no C++ compiler is found, or the build fails, the wheel is pure Python and
`opspace.simulate` runs its NumPy reference loop (slower, same results).
``OPSPACE_NO_KERNEL=1`` skips the build; ``OPSPACE_REQUIRE_KERNEL=1`` makes a
failed build an error (CI sets it).  A wheel built from a checkout also leaves
a copy of the module in the checkout's opspace/ (for tests run from there).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import sysconfig
import tempfile
from pathlib import Path

from hatchling.builders.hooks.plugin.interface import BuildHookInterface

SOURCE = Path("opspace") / "_kernel.cpp"
DEFINES = ("PINOCCHIO_ENABLE_TEMPLATE_INSTANTIATION", "BOOST_MPL_LIMIT_LIST_SIZE=30",
           "BOOST_MPL_LIMIT_VECTOR_SIZE=30", "BOOST_MPL_CFG_NO_PREPROCESSED_HEADERS",
           "BOOST_FUSION_INVOKE_MAX_ARITY=12")


def _cmeel_prefix():
    for entry in sys.path:
        prefix = Path(entry) / "cmeel.prefix"
        if (prefix / "include" / "pinocchio").is_dir():
            return prefix
    return None


def compile_kernel(root, out_dir):
    """Compile the kernel into out_dir; returns the path or raises RuntimeError."""
    prefix = _cmeel_prefix()
    if prefix is None:
        raise RuntimeError("Pinocchio's headers (the `pin` wheel's cmeel.prefix) not found")
    eigen = prefix / "include" / "eigen3"
    if not eigen.is_dir():
        raise RuntimeError(f"Eigen's headers not found at {eigen} (install cmeel-eigen)")
    import numpy
    cxx = os.environ.get("CXX") or shutil.which("c++") or shutil.which("g++")
    if cxx is None:
        raise RuntimeError("no C++ compiler (c++ or g++) on PATH")
    target = Path(out_dir) / ("_kernel" + sysconfig.get_config_var("EXT_SUFFIX"))
    cmd = [cxx, "-O3", "-std=c++17", "-shared", "-fPIC", "-fvisibility=hidden",
           str(Path(root) / SOURCE), "-o", str(target),
           f"-I{prefix / 'include'}", f"-I{eigen}", f"-I{sysconfig.get_paths()['include']}",
           f"-I{numpy.get_include()}", *(f"-D{d}" for d in DEFINES),
           f"-L{prefix / 'lib'}", "-lpinocchio_default", "-leigenpy",
           f"-lboost_python{sys.version_info.major}{sys.version_info.minor}",
           "-Wl,-rpath,$ORIGIN/../cmeel.prefix/lib", f"-Wl,-rpath,{prefix / 'lib'}"]
    run = subprocess.run(cmd, capture_output=True, text=True)
    if run.returncode != 0:
        raise RuntimeError(f"the C++ build failed:\n{' '.join(cmd)}\n{run.stderr[-4000:]}")
    return target


class KernelBuildHook(BuildHookInterface):
    PLUGIN_NAME = "custom"

    def initialize(self, version, build_data):
        if self.target_name != "wheel" or os.environ.get("OPSPACE_NO_KERNEL") == "1":
            return
        root = Path(self.root)
        editable = version == "editable"
        out_dir = root / "opspace" if editable else Path(tempfile.mkdtemp(prefix="opspace-k-"))
        try:
            target = compile_kernel(root, out_dir)
        except Exception as exc:          # optional: fall back to the pure-Python loop
            if os.environ.get("OPSPACE_REQUIRE_KERNEL") == "1":
                raise
            sys.stderr.write(f"opspace: the compiled simulation kernel was not built "
                             f"({exc}); the pure-Python loop will be used.\n")
            return
        build_data["pure_python"] = False
        build_data["infer_tag"] = True
        if not editable:
            build_data["force_include"][str(target)] = f"opspace/{target.name}"
            # a copy beside the sources too: `python -m pytest` in the checkout puts
            # the checkout first on sys.path, and its opspace should be compiled as
            # well (the copy is ignored by git and not packed; see pyproject.toml)
            try:
                shutil.copy2(target, root / "opspace" / target.name)
            except OSError:
                pass

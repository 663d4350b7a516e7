"""Where a whole-robot URDF and its meshes are: `package://` and `$(find pkg)`
resolved through the description's [package_paths] table (no robot software
stack needed), and xacro files expanded with the optional PyPI `xacro`
package.
"""

from __future__ import annotations

import contextlib
import re
from pathlib import Path

from ..errors import ConfigError
from ._toml import Section, check_file, read_text

__all__ = ["expand_xacro", "mesh_files", "read_package_paths", "resolve_uri", "urdf_source"]

_SCHEME = re.compile(r"^[a-z][a-z0-9+.-]*://", re.IGNORECASE)


def read_package_paths(path, table):
    """{package: directory} from the [package_paths] table; each value is a
    directory relative to the description file (or absolute) that must exist."""
    s = Section(path, "package_paths", table)
    packages = {}
    for name in table:
        folder = (Path(path).parent / s.string(name)).resolve()
        if not folder.is_dir():
            s.fail(name, f"must be an existing directory, got {table[name]!r} ({folder})")
        packages[name] = folder
    s.finish()
    return packages


def resolve_uri(uri, packages, folder, where):
    """A file named in a description or a URDF: ``package://pkg/rest`` through
    `packages`, ``file://`` as is, a relative path from `folder`.  An unknown
    package or scheme is a ConfigError prefixed with `where`."""
    if uri.startswith("package://"):
        pkg, _, rest = uri[len("package://"):].partition("/")
        if pkg not in packages:
            known = ", ".join(sorted(packages)) or "none"
            raise ConfigError(f"{where}: package '{pkg}' of {uri} is not in [package_paths] "
                              f"(known packages: {known})")
        return packages[pkg] / rest
    if uri.startswith("file://"):
        return Path(uri[len("file://"):])
    if _SCHEME.match(uri):
        raise ConfigError(f"{where}: {uri} has a scheme other than package:// or file://")
    p = Path(uri)
    return p if p.is_absolute() else Path(folder) / p


def urdf_source(path, uri, packages, args, where):
    """(file, text) of the whole-robot URDF named `uri` in `path`: read, or
    expanded from xacro when its name ends in ``.xacro``."""
    file = check_file(resolve_uri(uri, packages, Path(path).parent, where), where=where,
                      what="URDF file")
    if file.suffix == ".xacro":
        return file, expand_xacro(file, packages, args)
    return file, read_text(file, where=where, what="URDF file")


@contextlib.contextmanager
def _find_through(packages, file, failures):
    """xacro's `$(find pkg)` and `find('pkg')` answered from `packages` while
    the block runs (xacro looks packages up in a robot software stack's index);
    an unknown package's ConfigError is also put in `failures` (xacro wraps it)."""
    from xacro import substitution_args as sa

    def find(pkg):
        if pkg not in packages:
            known = ", ".join(sorted(packages)) or "none"
            failures.append(ConfigError(f"{file.name}: $(find {pkg}): package '{pkg}' is not "
                                        f"in [package_paths] (known packages: {known})"))
            raise failures[-1]
        return str(packages[pkg])

    saved = sa._eval_find, sa._eval_dict["find"]
    sa._eval_find = sa._eval_dict["find"] = find
    try:
        yield
    finally:
        sa._eval_find, sa._eval_dict["find"] = saved


def expand_xacro(file, packages, args=None, *, pretty=False):
    """The URDF text that xacro makes of `file` with `args` ({name: value} for
    ``$(arg name)``), indented when `pretty`; ConfigError naming the file and
    xacro's message.  `packages`: {package: directory} for ``$(find pkg)``."""
    try:
        import xacro
    except ImportError:
        raise ConfigError(f"{file.name}: expanding xacro needs the optional 'xacro' package "
                          f"(pip install 'opspace[xacro]')") from None
    failures = []
    try:
        with _find_through(packages, file, failures):
            doc = xacro.process_file(str(file), mappings=dict(args or {}))
    except Exception as exc:   # xacro raises its own, XML and eval errors alike
        if failures:
            raise failures[0] from None
        text = " ".join(str(exc).split()) or type(exc).__name__
        where = " ".join(str(f) for f in (getattr(xacro, "filestack", None) or [])[-1:])
        where = f" (in {Path(where).name})" if where and Path(where).name != file.name else ""
        raise ConfigError(f"{file.name}: xacro expansion failed{where}: {text}") from None
    return doc.toprettyxml(indent="  ") if pretty else doc.toxml()


def mesh_files(root, packages, folder):
    """[(link, uri, resolved path or None, exists)] for every <mesh filename>
    of the URDF's visual and collision elements (meshes only matter for drawing:
    a missing one is listed, never an error)."""
    out = []
    for link in root.iter("link"):
        for mesh in link.iter("mesh"):
            uri = mesh.get("filename", "")
            try:
                file = resolve_uri(uri, packages, folder, "mesh")
            except ConfigError:
                file = None
            out.append((link.get("name"), uri, file, file is not None and file.is_file()))
    return out

"""Reading and validating a sweep file; the design points it defines.

Every key is checked against the real base files before anything is sized:
a parameter must name a value that exists in the robot description, the duty
cycle or the catalogue (or a key their loaders accept), a number for list,
range and random sampling (text for a choice among names); the figures are
checked against the summary of the base design (`engine.run_sweep`).

Design points: the full factorial of the list and range parameters (the first
parameter varies slowest), crossed with a Latin hypercube of `samples` points
over the random parameters (McKay, Beckman & Conover, Technometrics 21(2),
1979: each parameter's range cut into `samples` equal strata, each stratum
sampled once, the strata paired at random), drawn by
`scipy.stats.qmc.LatinHypercube` with the sweep's seed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

from ..description import Entry, Section, read_document, referenced_path
from ..errors import ConfigError
from . import _docs as _docs
from ._paths import PathError, Step, matches, parse_figure, parse_path
from ._sampling import Point, design_points, latin_hypercube, range_values, random_bounds

__all__ = ["Constraint", "Parameter", "Point", "Sweep", "latin_hypercube", "load_sweep"]

TOP_LEVEL = ("sweep", "fixed", "parameter", "pareto", "constraint", "labels")
GOALS = ("min", "max")
#: the motor-size proxy against the tip-over margin (the issue's example)
DEFAULT_PARETO = ("max(described_drive.thermal_rms_motor_torque)", "min",
                  "stability.criteria[name=tip-over].margin", "max")
#: summary.json keys present only in some results
CONDITIONAL = {"recommended": "only when a candidate passes"}
SEARCH_ONLY = ("worst_case", "shortest_stop")


@dataclass(frozen=True)
class Parameter:
    """One varied value.

    key: the path as written (the CSV column); root: "robot", "cycle" or
    "catalogue"; steps: resolved (("key", name) | ("index", i)) into the base
    document; action: "set" (replace), "one" (a list replaced by [value]) or
    "select" (keep the array entry named value); sampling: "values", "range"
    or "random"; values: the list or range values (empty for random); low,
    high: the random bounds; label, unit: for tables and plots; base: the base
    file's value (None when the key is absent there).
    """

    key: str
    root: str
    steps: tuple
    action: str
    sampling: str
    values: tuple
    low: float | None
    high: float | None
    label: str
    unit: str
    base: object
    spec: str = ""

    @property
    def numeric(self):
        return self.action != "select" and not any(isinstance(v, str) for v in self.values)

    def title(self):
        return f"{self.label} [{self.unit}]" if self.unit else self.label


@dataclass(frozen=True)
class Constraint:
    """A feasibility limit on a collected figure: min <= value <= max."""

    figure: str
    min: float | None
    max: float | None

    def holds(self, value):
        if value is None or isinstance(value, (str, bool)) or math.isnan(value):
            return False
        return (self.min is None or value >= self.min) and (self.max is None or value <= self.max)

    def __str__(self):
        lo = "" if self.min is None else f"{self.min:g} <= "
        hi = "" if self.max is None else f" <= {self.max:g}"
        return f"{lo}{self.figure}{hi}"


@dataclass(frozen=True)
class Sweep:
    """A validated sweep file and its design points (see the package docstring)."""

    path: Path
    name: str
    duty_path: Path
    documents: object
    search: bool
    samples: int | None
    seed: int
    parameters: tuple
    fixed: tuple              # (key, root, steps, action, value)
    figures: tuple            # Figure, the CSV's figure columns in order
    pareto: tuple             # (x, x_goal, y, y_goal) figure texts and goals
    constraints: tuple
    require_pass: bool
    best: int
    labels: dict = field(default_factory=dict)   # figure text -> label for tables and plots
    points: tuple = field(repr=False, default=())

    def assignments(self, point):
        """(root, steps, action, value) of the fixed keys and the point's values."""
        out = [(root, steps, action, value) for _, root, steps, action, value in self.fixed]
        for p in self.parameters:
            out.append((p.root, p.steps, p.action, point.values[p.key]))
        return out

    def figure(self, text):
        return next(f for f in self.figures if f.text == text)

    @property
    def digest(self):
        """What a resumed output must share with this sweep: base documents,
        fixed keys, search, parameter keys and figure columns."""
        d = self.documents
        return _docs.digest({"docs": d.docs, "urdf": d.urdf_digest, "search": self.search,
                             "fixed": [(k, v) for k, _, _, _, v in self.fixed],
                             "parameters": [p.key for p in self.parameters],
                             "figures": [f.text for f in self.figures]})


# ------------------------------------------------------------------ reading


def load_sweep(path):
    """Read and validate a sweep file against its base files.

    Parameters
    ----------
    path : str or Path   the sweep TOML

    Returns
    -------
    Sweep   with its design points

    Raises
    ------
    ConfigError   naming the sweep file, the parameter (or key), the value and
                  the expectation
    """
    path, doc = read_document(path, None, TOP_LEVEL, ("sweep",))
    fname = path.name
    head = _read_head(Section(path, "sweep", doc["sweep"]), path)
    name, duty_rel, search, samples, seed, best, require_pass, figure_texts = head
    duty_path = referenced_path(path, duty_rel)
    documents = _docs.read_documents(duty_path, where=f"{fname}: [sweep] duty_cycle")
    _trial(documents, [], f"{fname}: [sweep] duty_cycle")
    fixed = _read_fixed(path, doc.get("fixed", {}), documents)
    fixed_assign = [(root, steps, action, value) for _, root, steps, action, value in fixed]
    entries = doc.get("parameter")
    if not isinstance(entries, list) or not entries:
        raise ConfigError(f"{fname}: no [[parameter]]: a sweep varies at least one value")
    params = []
    for i, entry in enumerate(entries, start=1):
        params.append(_read_parameter(path, i, entry, documents, fixed_assign))
    _check_unique(fname, params, fixed)
    _check_values(path, params, documents, fixed_assign)
    randoms = [p for p in params if p.sampling == "random"]
    if randoms and samples is None:
        raise ConfigError(f"{fname}: [sweep] samples is missing: parameter "
                          f"'{randoms[0].key}' is random (Latin hypercube of `samples` points)")
    if samples is not None and not randoms:
        raise ConfigError(f"{fname}: [sweep] samples = {samples} but no parameter is random "
                          f"(remove samples, or give a parameter `random = {{low, high}}`)")

    pareto = _read_pareto(path, doc.get("pareto", {}))
    constraints = _read_constraints(path, doc.get("constraint", []))
    figures = _figures(fname, figure_texts, pareto, constraints)
    labels = _read_labels(path, doc.get("labels", {}), figures)
    sweep = Sweep(path=path, name=name, duty_path=duty_path, documents=documents, search=search,
                  samples=samples, seed=seed, parameters=tuple(params), fixed=tuple(fixed),
                  figures=figures, pareto=pareto, constraints=constraints,
                  require_pass=require_pass, best=best, labels=labels)
    object.__setattr__(sweep, "points", tuple(design_points(sweep)))
    return sweep


def _read_head(s, path):
    """The [sweep] table: name, duty_cycle, search, samples, seed, best,
    require_pass, figures."""
    name = s.string("name", path.stem)
    duty_rel = s.string("duty_cycle")
    flags = {}
    for key, default in (("search", False), ("require_pass", True)):
        flags[key] = s.raw(key, default, required=False)
        if not isinstance(flags[key], bool):
            s.fail(key, f"must be true or false, got {flags[key]!r}")
    samples = _integer(s, "samples", None, lo=2)
    seed = _integer(s, "seed", 0, lo=0)
    best = _integer(s, "best", 10, lo=1)
    figure_texts = s.raw("figures")
    if (not isinstance(figure_texts, list) or not figure_texts
            or not all(isinstance(f, str) for f in figure_texts)):
        s.fail("figures", f"must be a non-empty list of summary.json paths, got {figure_texts!r}")
    s.finish()
    return (name, duty_rel, flags["search"], samples, seed, best, flags["require_pass"],
            figure_texts)


def _integer(s, key, default, *, lo):
    value = s.raw(key, default, required=False)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int) or value < lo:
        s.fail(key, f"must be an integer >= {lo}, got {value!r}")
    return value


def _check_unique(fname, params, fixed):
    seen = {}
    for k, _, _, _, _ in fixed:
        seen[k] = "[fixed]"
    for i, p in enumerate(params, start=1):
        if p.key in seen:
            raise ConfigError(f"{fname}: [[parameter]] {i} key '{p.key}' is already set by "
                              f"{seen[p.key]} (each key once)")
        seen[p.key] = f"[[parameter]] {i}"
    targets = {(root, steps): k for k, root, steps, _, _ in fixed}
    for i, p in enumerate(params, start=1):
        t = (p.root, p.steps)
        if t in targets:
            raise ConfigError(f"{fname}: [[parameter]] {i} key '{p.key}' names the same value "
                              f"as '{targets[t]}'")
        targets[t] = p.key


# ------------------------------------------------------------------ targets
def _root(key):
    try:
        steps = parse_path(key)
    except PathError as exc:
        raise ValueError(f"{exc}") from None
    first = steps[0]
    if first.kind != "key" or first.arg not in _docs.ROOTS:
        raise ValueError(f"must start with {', '.join(r + '.' for r in _docs.ROOTS)} (the "
                         f"robot description, the duty cycle or the catalogue)")
    rest = steps[1:]
    if not rest:
        raise ValueError("names a whole file: add the key, e.g. robot.base.mass")
    if first.arg == "cycle" and not (rest[0].kind == "key" and rest[0].arg in ("cycle", "segment")):
        rest = (Step("key", "cycle"),) + rest           # cycle.sample_rate = [cycle] sample_rate
    return first.arg, rest


def _where_text(fname, resolved):
    text = ""
    for kind, k in resolved:
        text += f".{k}" if kind == "key" else f"[{k}]"
    return f"{fname} {text.lstrip('.') or '(top level)'}"


def locate(documents, key):
    """(root, resolved steps, base value or None, exists) of a parameter key in
    the base documents; ValueError saying what is wrong otherwise."""
    root, steps = _root(key)
    doc = documents.docs[root]
    fname = documents.names[root]
    if doc is None:
        raise ValueError("the duty cycle names no catalogue ([cycle] catalogue)")
    node, resolved, exists = doc, [], True
    for i, step in enumerate(steps):
        last = i == len(steps) - 1
        here = _where_text(fname, resolved)
        if step.kind == "all" or (step.kind == "key" and step.arg == "*"):
            raise ValueError("'*' is for figures; a parameter names one value")
        if step.kind == "key":
            if not isinstance(node, dict):
                raise ValueError(f"{here} is not a table, it has no key '{step.arg}'")
            if step.arg not in node:
                if last or (i == len(steps) - 2 and steps[-1].kind == "key"):
                    resolved.append(("key", step.arg))
                    exists, node = False, {}
                    continue
                keys = ", ".join(node) or "none"
                raise ValueError(f"{here} has no key '{step.arg}' (keys there: {keys})")
            resolved.append(("key", step.arg))
            node = node[step.arg]
            continue
        if not isinstance(node, list):
            raise ValueError(f"{here} is not a list, it has no entry {step}")
        if step.kind == "index":
            if step.arg >= len(node):
                raise ValueError(f"{here} has {len(node)} entries, no {step} (positions count "
                                 f"from 0)")
            k = step.arg
        else:
            found = [j for j, e in enumerate(node) if matches(e, step.arg)]
            if len(found) != 1:
                raise ValueError(f"{here} has {len(found)} entries matching {step}, not one")
            k = found[0]
        resolved.append(("index", k))
        node = node[k]
    return root, tuple(resolved), (node if exists else None), exists


def _is_number(v):
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _kind_of(base, exists):
    """How a target is varied: "set" number or text, "one" list of numbers,
    "select" named array entries; None when it cannot be varied."""
    if not exists or _is_number(base):
        return "set", "number"
    if isinstance(base, str):
        return "set", "text"
    if isinstance(base, list) and base and all(_is_number(v) for v in base):
        return "one", "number"
    if (isinstance(base, list) and base and all(isinstance(e, dict) for e in base)
            and all(isinstance(e.get("name"), str) for e in base)):
        return "select", "name"
    return None, None


def _describe(value):
    if isinstance(value, dict):
        return f"a table ({', '.join(value)})"
    if isinstance(value, list):
        return f"a list {value!r}"[:80]
    return f"{type(value).__name__} {value!r}"


#: documents loaded by the trials, keyed on their content (read only)
_TRIALS = _docs.Cache(size=16)


def _trial(documents, assignments, where):
    """Load the documents with `assignments` (and cross-check the duty cycle
    against the robot when either changes); the loader's message, or None
    when they load.  A "not a known key", or any problem of the base files
    (no assignments), is raised as a ConfigError at `where`."""
    from ..description import check_against_robot

    docs = _docs.apply(documents.docs, assignments)
    roots = {a[0] for a in assignments} or set(_docs.ROOTS)
    loaded = {}
    try:
        for root in _docs.ROOTS:
            if root in roots and docs[root] is not None:
                loaded[root] = _TRIALS.get(documents, root, docs[root])
        if roots & {"robot", "cycle"}:
            robot = loaded.get("robot") or _TRIALS.get(documents, "robot", docs["robot"])
            duty = loaded.get("cycle") or _TRIALS.get(documents, "cycle", docs["cycle"])
            check_against_robot(duty, robot)
    except ConfigError as exc:
        text = str(exc)
        if not assignments or "is not a known" in text:
            raise ConfigError(f"{where}: {text}") from None
        return text
    return None


# ------------------------------------------------------------------ [fixed]
def _read_fixed(path, table, documents):
    fname = path.name
    if not isinstance(table, dict):
        raise ConfigError(f"{fname}: [fixed] must be a table of \"key\" = value, got {table!r}")
    out = []
    for key, value in table.items():
        where = f"{fname}: [fixed] \"{key}\""
        if isinstance(value, dict):
            raise ConfigError(f"{where} must be a value; write the whole path quoted, e.g. "
                              f"\"cycle.sample_rate\" = 100 (a dotted key without quotes "
                              f"makes a table)")
        try:
            root, steps, base, exists = locate(documents, key)
        except ValueError as exc:
            raise ConfigError(f"{where}: {exc}") from None
        action, vtype = _kind_of(base, exists)
        _check_type(where, action, vtype, base, [value])
        if action == "select":
            _check_names(where, base, [value])
        out.append((key, root, steps, action, value if not _is_number(value) else float(value)))
        msg = _trial(documents, [(root, steps, action, out[-1][4])], where)
        if msg is not None:
            raise ConfigError(f"{where} = {value!r}: {msg}")
    return out


def _check_type(where, action, vtype, base, values):
    if action is None:
        raise ConfigError(f"{where}: the target is {_describe(base)}, not a number: a sweep "
                          f"varies numbers (or chooses among names)")
    for v in values:
        ok = (_is_number(v) and math.isfinite(v)) if vtype == "number" else isinstance(v, str)
        if not ok:
            want = {"number": "finite numbers",
                    "text": f"strings (the target is the text {base!r})",
                    "name": "names of the entries (the target is an array of named tables)"}[vtype]
            raise ConfigError(f"{where} must be {want}, got {v!r}")


def _check_names(where, base, values):
    names = [e["name"] for e in base]
    for v in values:
        if v not in names:
            raise ConfigError(f"{where}: no entry named {v!r} (names: {', '.join(names)})")


# ------------------------------------------------------------------ [[parameter]]
def _read_parameter(path, i, entry, documents, fixed):
    fname = path.name
    if not isinstance(entry, dict):
        raise ConfigError(f"{fname}: [[parameter]] {i} must be a table, got {entry!r}")
    s = Entry(path, "parameter", i, entry, "key")
    key = s.string("key")
    label = s.string("label", key)
    unit = s.raw("unit", "", required=False)
    if not isinstance(unit, str):
        s.fail("unit", f"must be text, got {unit!r}")
    given = [k for k in ("values", "range", "random") if k in entry]
    if len(given) != 1:
        s.fail("", f"needs exactly one of values, range, random, got "
                   f"{', '.join(given) or 'none'}")
    sampling = given[0]
    raw = s.raw(sampling)
    s.finish()
    try:
        root, steps, base, exists = locate(documents, key)
    except ValueError as exc:
        raise ConfigError(f"{s.where('key')}: {exc}") from None
    action, vtype = _kind_of(base, exists)
    where = s.where(sampling)
    if action is None:
        raise ConfigError(f"{s.where('')}: {documents.names[root]} has "
                          f"{_describe(base)} there, not a number: a sweep varies numbers "
                          f"(or chooses among names)")
    low = high = None
    if sampling == "values":
        if not isinstance(raw, list) or not raw:
            raise ConfigError(f"{where} must be a non-empty list, got {raw!r}")
        _check_type(where, action, vtype, base, raw)
        if action == "select":
            _check_names(where, base, raw)
        values = tuple(float(v) if _is_number(v) else v for v in raw)
        dup = [v for v in values if values.count(v) > 1]
        if dup:
            raise ConfigError(f"{where} lists {dup[0]!r} more than once, got {raw!r}")
        spec = f"{len(values)} values"
    elif vtype != "number":
        raise ConfigError(f"{where}: '{key}' is {_describe(base)}: a range or random "
                          f"parameter needs a number (list the choices in `values`)")
    elif sampling == "range":
        values, spec = range_values(where, raw)
    else:
        low, high = random_bounds(where, raw)
        values, spec = (), f"Latin hypercube in [{low:g}, {high:g}]"
    if action == "one":
        msg = _trial(documents, fixed + [(root, steps, action, base[0])], s.where(""))
        if msg is not None:
            raise ConfigError(f"{s.where('')}: the target is a list of {len(base)} numbers: "
                              f"name one entry, e.g. '{key}[0]' ({msg})")
    return Parameter(key=key, root=root, steps=steps, action=action, sampling=sampling,
                     values=values, low=low, high=high, label=label, unit=unit,
                     base=base, spec=spec)


def _check_values(path, params, documents, fixed):
    """Each parameter's values tried on the base files before any point runs
    (`_probes`).  A value that fails on its own is refused when it also fails
    with every other parameter at its lowest and at its highest probe: then no
    point can use it.  A value that breaks a rule only with some values of the
    other parameters (an invalid combination) is left to its points."""
    def at(p, v):
        return (p.root, p.steps, p.action, v)

    probes = [_probes(p.values, p.low, p.high, "number" if p.numeric else "text")
              for p in params]
    for i, p in enumerate(params):
        where = Entry(path, "parameter", i + 1, {"key": p.key}, "key").where(p.sampling)
        for v in probes[i]:
            msg = _trial(documents, fixed + [at(p, v)], where)
            if msg is None:
                continue
            contexts = [[at(q, probes[j][k]) for j, q in enumerate(params) if j != i]
                        for k in (0, -1)]
            if all(_trial(documents, fixed + ctx + [at(p, v)], where) for ctx in contexts
                   if ctx):
                raise ConfigError(f"{where}: {v!r} is not valid there: {msg}")


def _probes(values, low, high, vtype):
    """The values of a parameter tried on the base files before any point
    runs: every name or text, else the extremes (and 0 when listed): the
    files' rules are ranges, so the extremes pass when every value does (a
    combination of parameters that breaks a rule still fails at its point)."""
    if vtype != "number":
        return list(dict.fromkeys(values))
    pool = list(values) or [low, high]
    probes = [min(pool), max(pool)] + ([0.0] if 0.0 in pool else [])
    return list(dict.fromkeys(probes))


# ------------------------------------------------------------------ figures
def _read_pareto(path, table):
    s = Section(path, "pareto", table)
    x = s.string("x", DEFAULT_PARETO[0])
    xg = s.string("x_goal", DEFAULT_PARETO[1] if x == DEFAULT_PARETO[0] else "min")
    y = s.string("y", DEFAULT_PARETO[2])
    yg = s.string("y_goal", DEFAULT_PARETO[3] if y == DEFAULT_PARETO[2] else "max")
    for k, g in (("x_goal", xg), ("y_goal", yg)):
        if g not in GOALS:
            s.fail(k, f"must be 'min' or 'max', got {g!r}")
    if x.strip() == y.strip():
        s.fail("y", f"must differ from x, got {y!r} twice")
    s.finish()
    return (x.strip(), xg, y.strip(), yg)


def _read_constraints(path, entries):
    if not isinstance(entries, list):
        raise ConfigError(f"{path.name}: [constraint] must be an array of tables, written "
                          f"[[constraint]]")
    out = []
    for i, entry in enumerate(entries, start=1):
        s = Entry(path, "constraint", i, entry if isinstance(entry, dict) else {}, "figure")
        figure = s.string("figure")
        lo = s.number("min", required=False)
        hi = s.number("max", required=False)
        s.finish()
        if lo is None and hi is None:
            s.fail("", "needs min, max or both")
        if lo is not None and hi is not None and lo > hi:
            s.fail("min", f"must be <= max ({hi:g}), got {lo:g}")
        out.append(Constraint(figure=figure.strip(), min=lo, max=hi))
    return tuple(out)


def _figures(fname, texts, pareto, constraints):
    """The figure columns: the listed ones, then the Pareto axes and the
    constraint figures not listed.  "status" is the `verdict` column and
    "message" the `message` column (always written)."""
    out, seen = [], set()
    wanted = [(f"[sweep] figures entry {t!r}", t) for t in texts]
    wanted += [(f"[pareto] {k}", t) for k, t in (("x", pareto[0]), ("y", pareto[2]))]
    wanted += [(f"[[constraint]] {i} figure", c.figure) for i, c in enumerate(constraints, 1)]
    for where, text in wanted:
        if text.strip() in ("status", "message"):
            continue
        try:
            f = parse_figure(text)
        except PathError as exc:
            raise ConfigError(f"{fname}: {where}: {exc}") from None
        if f.text not in seen:
            seen.add(f.text)
            out.append(f)
    return tuple(out)


def _read_labels(path, table, figures):
    """[labels]: "figure text" = "label"; every key a collected figure."""
    if not isinstance(table, dict):
        raise ConfigError(f"{path.name}: [labels] must be a table of \"figure\" = \"label\", "
                          f"got {table!r}")
    known = {f.text for f in figures}
    out = {}
    for key, label in table.items():
        if isinstance(label, dict):
            raise ConfigError(f"{path.name}: [labels] {key}: quote the whole figure, e.g. "
                              f"\"stability.min_tip_over_margin\" = \"tip-over margin\"")
        if key.strip() not in known:
            raise ConfigError(f"{path.name}: [labels] \"{key}\" is not a collected figure "
                              f"(figures: {', '.join(sorted(known))})")
        if not isinstance(label, str) or not label.strip():
            raise ConfigError(f"{path.name}: [labels] \"{key}\" must be a non-empty string, "
                              f"got {label!r}")
        out[key.strip()] = label.strip()
    return out


def check_figures(sweep, summary):
    """Every figure of the sweep resolves in `summary` (the base design's);
    units per figure text (None for bare values)."""
    fname = sweep.path.name
    units = {}
    numeric = {sweep.pareto[0], sweep.pareto[2]} | {c.figure for c in sweep.constraints}
    for f in sweep.figures:
        head = f.steps[0].arg
        if head in SEARCH_ONLY and not sweep.search:
            raise ConfigError(f"{fname}: figure '{f.text}' is computed by the worst-case "
                              f"search: set [sweep] search = true")
        if head in CONDITIONAL and head not in summary:
            units[f.text] = None
            continue
        try:
            value, unit = f.evaluate(summary)
        except PathError as exc:
            raise ConfigError(f"{fname}: figure '{f.text}' is not in summary.json of the base "
                              f"design: {exc}") from None
        if f.text in numeric and not (_is_number(value) or value is None):
            raise ConfigError(f"{fname}: figure '{f.text}' (Pareto axis or constraint) must be "
                              f"a number, got {value!r}")
        units[f.text] = unit
    return units



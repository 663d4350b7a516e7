"""Dotted paths: into the base documents (parameters) and into summary.json
(figures).

Grammar (both kinds)::

    path     := name ( "." name | "[" selector "]" )*
    selector := integer            # 0-based position in a list
              | field "=" value ("," field "=" value)*   # the entries whose field equals value
              | "*"                # every entry (figures only, under a reducer)
    figure   := path | reducer "(" path ")"      reducer: max min sum mean count

Names are letters, digits, "_" and "-"; "*" as a name takes every value of a
table (figures only).  A selector's value is compared with the entry's field
as a number when both read as numbers, else as text ("PL2 planetary").

Figures: a leaf of summary.json is a {"value": ..., "unit": ...} table or a
bare scalar (true/false, text, a number); an index into a leaf whose value is
a list takes that element.  Without a reducer a figure must name exactly one
leaf; `max`, `min`, `sum`, `mean` reduce numeric leaves (null when any is
null), `count` counts the leaves that are true (booleans) or not null, and
the entries that are tables or lists (`count(candidates[*])`).  A reducer's
path may end at a table of figures or a list: it reduces over its entries
(`max(wheels.peak_torque)` is the larger of the two wheels).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

__all__ = ["Figure", "PathError", "Step", "parse_figure", "parse_path"]

_NAME = re.compile(r"[A-Za-z0-9_\-]+|\*")
_REDUCED = re.compile(r"^\s*(max|min|sum|mean|count)\s*\((.*)\)\s*$")
REDUCERS = ("max", "min", "sum", "mean", "count")


class PathError(ValueError):
    """A path that does not parse or does not resolve; `what` says why."""


@dataclass(frozen=True)
class Step:
    """One step of a path: kind "key" (arg: name, "*" for all values),
    "index" (arg: int), "all" (every list entry) or "match" (arg: tuple of
    (field, text) pairs)."""

    kind: str
    arg: object = None

    def __str__(self):
        if self.kind == "key":
            return f".{self.arg}"
        if self.kind == "index":
            return f"[{self.arg}]"
        if self.kind == "all":
            return "[*]"
        return "[" + ",".join(f"{f}={v}" for f, v in self.arg) + "]"


def parse_path(text):
    """Steps of a dotted path (PathError when it does not parse)."""
    if not isinstance(text, str) or not text.strip():
        raise PathError(f"must be a non-empty dotted path, got {text!r}")
    s = text.strip()
    steps, i, n = [], 0, len(s)
    while i < n:
        c = s[i]
        if c == "[":
            j = s.find("]", i)
            if j < 0:
                raise PathError(f"has an unclosed '[' at position {i}")
            steps.append(_selector(s[i + 1:j].strip(), text))
            i = j + 1
            continue
        if c == ".":
            if not steps:
                raise PathError("must not start with '.'")
            i += 1
        elif steps:
            raise PathError(f"expects '.' or '[' at position {i}, got {c!r}")
        m = _NAME.match(s, i)
        if not m:
            raise PathError(f"expects a name at position {i}")
        steps.append(Step("key", m.group(0)))
        i = m.end()
    return tuple(steps)


def _selector(inner, text):
    if inner == "*":
        return Step("all")
    if re.fullmatch(r"[+-]?\d+", inner):
        k = int(inner)
        if k < 0:
            raise PathError(f"index [{inner}] must be >= 0 (positions count from 0)")
        return Step("index", k)
    pairs = []
    for part in inner.split(","):
        field, eq, value = part.partition("=")
        field, value = field.strip(), value.strip()
        if not eq or not _NAME.fullmatch(field) or field == "*" or not value:
            raise PathError(f"selector [{inner}] must be an index, '*' or field=value "
                            f"pairs separated by ','")
        pairs.append((field, value))
    return Step("match", tuple(pairs))


def path_text(steps):
    return "".join(str(s) for s in steps).lstrip(".")


# ------------------------------------------------------------------ matching
def _as_number(x):
    if isinstance(x, bool):
        return None
    if isinstance(x, (int, float)):
        return float(x)
    try:
        return float(x)
    except (TypeError, ValueError):
        return None


def _field_value(entry, field):
    v = entry.get(field)
    if isinstance(v, dict) and "value" in v:
        v = v["value"]
    return v


def matches(entry, pairs):
    """True when every (field, text) of `pairs` equals the entry's field."""
    if not isinstance(entry, dict):
        return False
    for field, text in pairs:
        if field not in entry:
            return False
        v = _field_value(entry, field)
        a, b = _as_number(v), _as_number(text)
        if a is not None and b is not None and not isinstance(v, str):
            if a != b:
                return False
        elif str(v) != text:
            return False
    return True


# ------------------------------------------------------------------ figures
def is_leaf(node):
    return isinstance(node, dict) and "value" in node and "unit" in node


@dataclass(frozen=True)
class Figure:
    """A figure to collect: its text (the CSV column), the reducer or None,
    and the path steps."""

    text: str
    reducer: str | None
    steps: tuple

    def leaves(self, summary):
        """[(value, unit)] of every leaf the path names (PathError if one step
        does not resolve; its message names the step and what is there)."""
        nodes = [(summary, None)]
        done = ""
        for step in self.steps:
            nodes = [x for node in nodes for x in _step(node, step, done)]
            done += str(step)
            if not nodes:
                raise PathError(f"'{done.lstrip('.')}' names no entry")
        if self.reducer is not None:      # max(a.table) reduces over the table's figures
            nodes = [x for node in nodes for x in _expand(node)]
        out = []
        for node, unit in nodes:
            if is_leaf(node):
                out.append((node["value"], node["unit"]))
            elif isinstance(node, (dict, list)) and self.reducer == "count":
                out.append((True, None))          # a table or list counts as one entry
            elif isinstance(node, (dict, list)):
                keys = (", ".join(node) if isinstance(node, dict)
                        else f"a list of {len(node)} entries")
                raise PathError(f"'{self.text}' is not a single figure but a table or "
                                f"list ({keys}): name one entry or reduce with max(...)")
            else:
                out.append((node, unit))
        return out

    def evaluate(self, summary):
        """(value, unit) of this figure in `summary` (PathError if missing)."""
        leaves = self.leaves(summary)
        if self.reducer is None:
            if len(leaves) != 1:
                raise PathError(f"'{self.text}' names {len(leaves)} figures: add conditions "
                                f"to its selectors, or reduce with max(...), min(...), ...")
            return leaves[0]
        units = {u for _, u in leaves}
        unit = units.pop() if len(units) == 1 else None
        values = [v for v, _ in leaves]
        if self.reducer == "count":
            if all(isinstance(v, bool) for v in values):
                return sum(values), "1"
            return sum(v is not None for v in values), "1"
        if any(v is None for v in values):
            return None, unit
        if not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in values):
            raise PathError(f"{self.reducer}(...) needs numbers, '{self.text}' names "
                            f"{sorted({type(v).__name__ for v in values})}")
        if self.reducer == "max":
            return max(values), unit
        if self.reducer == "min":
            return min(values), unit
        total = math.fsum(values)
        return (total if self.reducer == "sum" else total / len(values)), unit


def _expand(node):
    """A table of figures or a list -> its entries; anything else unchanged."""
    value, unit = node
    if (isinstance(value, dict) and not is_leaf(value)
            and all(is_leaf(v) or not isinstance(v, (dict, list)) for v in value.values())):
        return [(v, unit) for v in value.values()]
    if isinstance(value, list):
        return [(v, unit) for v in value]
    return [node]


def _step(node, step, done):
    """[(child, unit)] reached from (node, unit) by one step."""
    node, unit = node
    here = f"'{done.lstrip('.')}'" if done else "the summary"
    if step.kind == "key":
        if not isinstance(node, dict) or is_leaf(node):
            raise PathError(f"{here} is not a table, it has no key '{step.arg}'")
        if step.arg == "*":
            return [(v, unit) for v in node.values()]
        if step.arg not in node:
            raise PathError(f"{here} has no key '{step.arg}' (keys: {', '.join(node)})")
        return [(node[step.arg], unit)]
    if is_leaf(node) and isinstance(node["value"], list):
        values, unit = node["value"], node["unit"]
    elif isinstance(node, list):
        values = node
    else:
        raise PathError(f"{here} is not a list, it has no entry {step}")
    if step.kind == "index":
        if step.arg >= len(values):
            raise PathError(f"{here} has {len(values)} entries, no {step} (positions count "
                            f"from 0)")
        return [(values[step.arg], unit)]
    if step.kind == "all":
        return [(v, unit) for v in values]
    return [(v, unit) for v in values if matches(v, step.arg)]


def parse_figure(text):
    """A Figure from its text (PathError when it does not parse)."""
    if not isinstance(text, str):
        raise PathError(f"must be a string, got {text!r}")
    m = _REDUCED.match(text)
    reducer, inner = (m.group(1), m.group(2)) if m else (None, text)
    steps = parse_path(inner)
    if reducer is None and any(s.kind == "all" or (s.kind == "key" and s.arg == "*")
                               for s in steps):
        raise PathError(f"'{text}' uses '*': wrap it in a reducer, e.g. max({text.strip()})")
    return Figure(text=text.strip(), reducer=reducer, steps=steps)

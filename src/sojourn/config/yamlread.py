"""Reading YAML input safely: data plus the line of every key.

Only YAML's core schema is read: plain scalars become strings, numbers,
booleans or null; dates stay text; explicit tags (``!!int``, ``!!python/...``)
are refused; so is input past a size limit, an alias that contains itself, a
key given twice and text that is not valid Unicode. Every refusal is one line
naming the file and line. Nothing in the text can run code.
"""
from __future__ import annotations

import re
import stat
from pathlib import Path
from typing import Any

import yaml

from ..errors import ScenarioError, one_line

MAX_TEXT = 1_000_000     # characters of one YAML input (a scenario is a few hundred)
MAX_NODES = 100_000      # distinct YAML nodes (aliases count once)
MAX_ITEMS = 1_000_000    # items after aliases are expanded (an alias "bomb" is refused)


class _CoreLoader(yaml.SafeLoader):
    """The safe loader without the timestamp resolver: `2024-02-30` is text."""


_CoreLoader.yaml_implicit_resolvers = {
    first: [(tag, regexp) for tag, regexp in resolvers if tag != "tag:yaml.org,2002:timestamp"]
    for first, resolvers in yaml.SafeLoader.yaml_implicit_resolvers.items()}
# integers: decimal, 0x and 0o only (YAML 1.1's sexagesimal 1:30 and 0b stay text)
_INT = re.compile(r"^[-+]?(0|[1-9][0-9_]*|0x[0-9a-fA-F_]+|0o[0-7_]+)$")


class _Refused(Exception):
    def __init__(self, line: int, message: str):
        self.line, self.message = line, message


def _check_node(node, path, lines, seen, counter) -> None:
    """Record the line of every key; visit each node once, so that aliases (which
    share nodes, possibly in a cycle) cost nothing; refuse a key given twice, an
    explicit tag, and too many nodes."""
    lines.setdefault(path, node.start_mark.line + 1)
    if id(node) in seen:
        return
    seen.add(id(node))
    counter[0] += 1
    line = node.start_mark.line + 1
    if counter[0] > MAX_NODES:
        raise _Refused(line, f"more than {MAX_NODES} YAML items; a scenario is far smaller")
    at = f"{format_path(path)}: "      # the key the refused value belongs to
    if isinstance(node, yaml.ScalarNode):
        implicit = _CoreLoader.resolve(_CoreLoader, yaml.ScalarNode, node.value, (True, False))
        if node.tag != implicit and not (node.style and node.tag == "tag:yaml.org,2002:str"):
            raise _Refused(line, f"{at}explicit YAML tags ({node.tag.replace('tag:yaml.org,2002:', '!!')})"
                                 " are not accepted: write the plain value")
        if node.tag == "tag:yaml.org,2002:int" and not _INT.match(node.value):
            raise _Refused(line, f"{at}{node.value!r} is not a plain integer")
        if node.tag == "tag:yaml.org,2002:int" and len(node.value) > 400:
            raise _Refused(line, f"{at}an integer of more than 400 digits")
    elif isinstance(node, yaml.MappingNode):
        if node.tag not in ("tag:yaml.org,2002:map",):
            raise _Refused(line, f"{at}explicit YAML tags are not accepted: write a plain mapping")
        keys = set()
        for key_node, value_node in node.value:
            key = key_node.value
            if isinstance(key, str):
                if key in keys and key != "<<":
                    raise _Refused(key_node.start_mark.line + 1,
                                   f"{format_path(path + (key,))}: key given twice (keep one)")
                keys.add(key)
            lines[path + (key,)] = key_node.start_mark.line + 1
            _check_node(key_node, path + (key, "<key>"), {}, seen, counter)
            _check_node(value_node, path + (key,), lines, seen, counter)
    elif isinstance(node, yaml.SequenceNode):
        if node.tag not in ("tag:yaml.org,2002:seq",):
            raise _Refused(line, f"{at}explicit YAML tags are not accepted: write a plain list")
        for i, item in enumerate(node.value):
            lines[path + (i,)] = item.start_mark.line + 1
            _check_node(item, path + (i,), lines, seen, counter)


def expanded_size(data, limit: float = MAX_ITEMS) -> float:
    """How many items the data hold once aliases are expanded, counted up to just
    past `limit` (inf for data that contain themselves). A shared list is
    measured once and counted at each use, so an alias bomb is measured without
    being expanded."""
    sizes: dict = {}
    active: set = set()

    def size(node) -> float:
        if not isinstance(node, (dict, list)):
            return 1
        key = id(node)
        if key in sizes:
            return sizes[key]
        if key in active:
            return float("inf")
        active.add(key)
        items = list(node.keys()) + list(node.values()) if isinstance(node, dict) else node
        total = 1.0
        for item in items:
            total += size(item)
            if total > limit:
                break
        active.discard(key)
        sizes[key] = total if total == float("inf") else min(total, limit + 1)
        return sizes[key]

    return size(data)


def _bad_text(data, seen=None) -> bool:
    """True if a string in the data cannot be written as UTF-8 (a lone surrogate)."""
    seen = set() if seen is None else seen
    if isinstance(data, str):
        try:
            data.encode("utf-8")
        except UnicodeEncodeError:
            return True
        return False
    if not isinstance(data, (dict, list)) or id(data) in seen:
        return False
    seen.add(id(data))
    items = list(data.keys()) + list(data.values()) if isinstance(data, dict) else data
    return any(_bad_text(item, seen) for item in items)


def parse_yaml(text: str, source: str, error=ScenarioError, max_items: int = MAX_ITEMS,
               what: str = "items") -> tuple[Any, dict]:
    """YAML text → (plain data, {key path: line}), or a one-line `error`
    (at most `max_items` items once aliases are expanded)."""
    if len(text) > MAX_TEXT:
        raise error(f"{source}:1: the file has {len(text)} characters, more than "
                            f"{MAX_TEXT}; a scenario is far smaller")
    lines: dict = {}
    try:
        node = yaml.compose(text, Loader=_CoreLoader)
        if node is not None:
            _check_node(node, (), lines, set(), [0])
        data = yaml.load(text, Loader=_CoreLoader)
    except _Refused as exc:
        raise error(f"{source}:{exc.line}: {exc.message}") from None
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark else 1
        raise error(f"{source}:{line}: not valid YAML: "
                            f"{one_line(exc.problem or exc)}") from None
    except yaml.YAMLError as exc:
        raise error(f"{source}:1: not valid YAML: {one_line(exc)}") from None
    except (ValueError, TypeError, OverflowError) as exc:   # a scalar the constructor cannot read
        raise error(f"{source}:1: a value cannot be read: {one_line(exc, 120)}") from None
    except (RecursionError, MemoryError):
        raise error(f"{source}:1: YAML nested too deeply") from None
    try:
        size = expanded_size(data, max_items)
    except RecursionError:
        raise error(f"{source}:1: YAML nested too deeply") from None
    if size == float("inf"):
        raise error(f"{source}:1: an alias (*name) refers to itself; a scenario "
                            "cannot contain itself")
    if size > max_items:
        raise error(f"{source}:1: the file expands to more than {max_items:,} {what} (aliases "
                    "counted each time they are used); write fewer values out")
    if _bad_text(data):
        raise error(f"{source}:1: the text holds a character that is not valid "
                            "Unicode (a lone surrogate such as \\ud800)")
    return data, lines


def format_path(loc) -> str:
    """A key path as the messages show it: packet.width, potential[0].step.height."""
    out = ""
    for part in loc:
        if isinstance(part, str) and not (part.isprintable() and part.strip() == part and part):
            part = repr(part)   # a key with a newline or blanks, shown so it can be seen
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out or "(top level)"


def read_text(path: Path, what: str = "scenario", error=ScenarioError) -> str:
    """A YAML file's text, or `error` naming the file and why it cannot be read
    (a missing or unreadable file, a folder, a FIFO or device, or one too large)."""
    try:
        info = path.stat()
        if not stat.S_ISREG(info.st_mode):
            raise error(f"{path}: not a regular file; give the {what} file's path")
        if info.st_size > 4 * MAX_TEXT:
            raise error(f"{path}: the {what} file is {info.st_size} bytes; a {what} file is "
                        "far smaller")
        return path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise error(f"{path}: cannot read the {what} file ({exc.__class__.__name__}: "
                    f"{getattr(exc, 'strerror', None) or exc})") from None

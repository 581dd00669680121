"""Read a description file as YAML, bounded: size, alias expansion and nesting are limited.

The file is parsed once, into a node graph (with the C reader when PyYAML has it): aliases stay shared
nodes there, so a small file of nested aliases costs no memory until it is expanded. The graph is then
measured (nodes after expanding every alias, nesting depth, keys written twice) before any Python
object is built from it, and the key-to-line map is taken from the same graph. Only the safe tags are
understood: nothing in a description is ever evaluated as code.
"""
from __future__ import annotations

from pathlib import Path
from typing import Any

import yaml

from ..errors import DescriptionError, cut, shown

#: Limits far above any real description (the longest has a few hundred entries).
MAX_BYTES = 256_000
MAX_NODES = 20_000
MAX_DEPTH = 40
#: Below this many possible openings the C composer's recursion is safely shallow: no scan is needed.
_SHALLOW = 5_000

_LOADER = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
_MERGE = "tag:yaml.org,2002:merge"


_OPENING = (yaml.BlockMappingStartToken, yaml.BlockSequenceStartToken, yaml.FlowMappingStartToken,
            yaml.FlowSequenceStartToken)
_CLOSING = (yaml.BlockEndToken, yaml.FlowMappingEndToken, yaml.FlowSequenceEndToken)


class _TooLarge(Exception):
    pass


def _check_nesting(text: str) -> None:
    """Refuse deep nesting before composing: the C reader's composer recurses once per level and would
    overflow the C stack on a file of 100,000 nested brackets (the scanner does not recurse). The
    pure-Python reader raises RecursionError instead, so it needs no scan."""
    if _LOADER is yaml.SafeLoader or sum(text.count(c) for c in "[{-?:\n") < _SHALLOW:
        return
    depth = 0
    for token in yaml.scan(text, Loader=_LOADER):
        if isinstance(token, _OPENING):
            depth += 1
            if depth > MAX_DEPTH:
                raise _TooLarge(f"nested more than {MAX_DEPTH} levels deep")
        elif isinstance(token, _CLOSING):
            depth -= 1


def _read_text(path: Path, what: str) -> str:
    try:
        if path.is_dir():
            raise DescriptionError(f"{path}: is a folder, not a {what} file")
        with open(path, "rb") as handle:
            raw = handle.read(MAX_BYTES + 1)
    except FileNotFoundError:
        raise DescriptionError(f"{path}: {what} file not found") from None
    except (OSError, RuntimeError) as exc:
        reason = getattr(exc, "strerror", None) or exc.__class__.__name__
        raise DescriptionError(f"{path}: cannot read the {what} ({reason})") from exc
    if len(raw) > MAX_BYTES:
        raise DescriptionError(f"{path.name}: the {what} is larger than {MAX_BYTES // 1000} kB; it should be a "
                               "short file")
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        raise DescriptionError(f"{path.name}: cannot read the {what} (not UTF-8 text)") from None


def _children(node: yaml.Node) -> list[yaml.Node]:
    if isinstance(node, yaml.MappingNode):
        return [part for pair in node.value for part in pair]
    if isinstance(node, yaml.SequenceNode):
        return list(node.value)
    return []


def _measure(node: yaml.Node, sizes: dict[int, int], open_nodes: set[int], depth: int) -> int:
    """Number of nodes once every alias is expanded (memoised per shared node)."""
    if isinstance(node, yaml.ScalarNode):
        return 1
    if depth > MAX_DEPTH:
        raise _TooLarge(f"nested more than {MAX_DEPTH} levels deep")
    if id(node) in sizes:
        return sizes[id(node)]
    if id(node) in open_nodes:
        raise _TooLarge("an alias refers to the collection that contains it")
    open_nodes.add(id(node))
    size = 1 + sum(_measure(child, sizes, open_nodes, depth + 1) for child in _children(node))
    open_nodes.discard(id(node))
    if size > MAX_NODES:
        raise _TooLarge(f"more than {MAX_NODES:,} entries once its aliases are expanded")
    sizes[id(node)] = size
    return size


def _duplicates(node: yaml.Node, seen: set[int], found: list[str]) -> None:
    if id(node) in seen:
        return
    seen.add(id(node))
    if isinstance(node, yaml.MappingNode):
        first: dict[str, int] = {}
        for key, _ in node.value:
            if not isinstance(key, yaml.ScalarNode) or key.tag == _MERGE:
                continue
            line = key.start_mark.line + 1
            if key.value in first:
                found.append(f"key {shown(key.value)} (line {line}): written twice (first at line {first[key.value]})")
            first.setdefault(key.value, line)
    for child in _children(node):
        _duplicates(child, seen, found)


def _line_map(node: yaml.Node, prefix: str = "", lines: dict[str, int] | None = None) -> dict[str, int]:
    lines = {} if lines is None else lines
    if isinstance(node, yaml.MappingNode):
        for key_node, value_node in node.value:
            key = f"{prefix}.{key_node.value}" if prefix else str(key_node.value)
            lines.setdefault(key, key_node.start_mark.line + 1)
            _line_map(value_node, key, lines)
    return lines


def _yaml_problem(path: Path, exc: yaml.YAMLError) -> DescriptionError:
    mark = getattr(exc, "problem_mark", None)
    where = f" at line {mark.line + 1}" if mark else ""
    problem = getattr(exc, "problem", None) or "malformed YAML"
    return DescriptionError(f"{path.name}: not valid YAML{where}: {cut(problem, 120)}")


def read_yaml(path: Path, what: str = "description") -> tuple[Any, dict[str, int], list[str]]:
    """The parsed file, the line of every key path, and the keys written twice (as problems).

    `what` names the file in messages ("description", "population"). An empty file gives None.
    """
    text = _read_text(path, what)
    try:
        _check_nesting(text)
        root = yaml.compose(text, Loader=_LOADER)
        if root is not None:
            _measure(root, {}, set(), 0)
    except yaml.YAMLError as exc:
        raise _yaml_problem(path, exc) from exc
    except RecursionError:
        raise DescriptionError(f"{path.name}: the {what} is nested more than {MAX_DEPTH} levels deep") from None
    except _TooLarge as exc:
        raise DescriptionError(f"{path.name}: the {what} is {exc}; refused") from None
    if root is None:
        return None, {}, []
    duplicates: list[str] = []
    _duplicates(root, set(), duplicates)
    try:
        tree = _LOADER("").construct_document(root)
    except yaml.YAMLError as exc:
        raise _yaml_problem(path, exc) from exc
    except (ValueError, OverflowError) as exc:   # e.g. an integer with more digits than Python converts
        raise DescriptionError(f"{path.name}: a value cannot be read ({cut(str(exc), 80)})") from None
    return tree, _line_map(root), duplicates

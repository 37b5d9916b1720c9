"""Safe YAML loading that remembers the line of every key, so errors can point at it."""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import yaml

from cohortstone.errors import ConfigError

KeyPath = tuple  # of str | int


@dataclass(frozen=True)
class RawConfig:
    """The YAML document as plain Python values, with the 1-based line of each key path."""

    data: Any
    lines: dict = field(default_factory=dict)
    file: str | None = None
    directory: Path = Path(".")

    def line(self, path: KeyPath) -> int | None:
        """Line of `path`, or of its nearest parent that has one."""
        path = tuple(path)
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path[:-1]
        return None


_PLAIN_TAGS = {f"tag:yaml.org,2002:{t}" for t in
               ("map", "seq", "str", "int", "float", "bool", "null", "timestamp")}


def _construct(node: yaml.Node, path: KeyPath, lines: dict) -> Any:
    lines.setdefault(path, node.start_mark.line + 1)
    if node.tag not in _PLAIN_TAGS:
        raise ConfigError(f"line {node.start_mark.line + 1}: the YAML tag `{node.tag}` is not "
                          "allowed; a config holds only plain text, numbers, lists and mappings.")
    if isinstance(node, yaml.MappingNode):
        out: dict = {}
        for key_node, value_node in node.value:
            key = str(_scalar(key_node))
            lines[path + (key,)] = key_node.start_mark.line + 1
            if key in out:
                raise ConfigError(
                    f"key `{dotted(path + (key,))}` (line {key_node.start_mark.line + 1}) "
                    "appears twice; keep one."
                )
            out[key] = _construct(value_node, path + (key,), lines)
        return out
    if isinstance(node, yaml.SequenceNode):
        return [_construct(item, path + (i,), lines) for i, item in enumerate(node.value)]
    return _scalar(node)


def _scalar(node: yaml.Node) -> Any:
    if not isinstance(node, yaml.ScalarNode):
        raise ConfigError(f"line {node.start_mark.line + 1}: a key must be plain text.")
    return _LOADER.construct_object(node, deep=True)


_LOADER = yaml.SafeLoader("")


def dotted(path: KeyPath) -> str:
    """`('models', 0, 'type')` -> `models[0].type`."""
    out = ""
    for part in path:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out


def load_yaml(source: str | Path | dict) -> RawConfig:
    """Read a config file (or take a dict, for notebooks) without executing anything in it."""
    if isinstance(source, dict):
        return RawConfig(data=source, lines={}, file=None, directory=Path.cwd())
    path = Path(source)
    if not path.is_file():
        raise ConfigError(f"config file not found: {path}. Give the path of a YAML file.")
    text = path.read_text(encoding="utf-8")
    try:
        node = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" at line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        problem = getattr(exc, "problem", None) or str(exc)
        raise ConfigError(
            f"the file is not valid YAML{where}: {problem}. Check indentation and quoting there.",
            file=str(path),
        ) from None
    lines: dict = {}
    try:
        data = {} if node is None else _construct(node, (), lines)
    except ConfigError as exc:
        raise ConfigError(exc.problems, file=str(path)) from None
    except yaml.YAMLError as exc:
        raise ConfigError(f"the file is not valid YAML: {exc}", file=str(path)) from None
    return RawConfig(data=data, lines=lines, file=str(path), directory=path.resolve().parent)

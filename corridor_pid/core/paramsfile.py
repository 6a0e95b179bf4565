# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Read and write ROS 2 parameters YAML files (``node: {ros__parameters: ...}``).

The loader accepts the sections a ROS 2 node would take its parameters from: ``corridor_pid``,
``/corridor_pid``, a namespaced ``/ns/corridor_pid`` (or nested ``ns: {corridor_pid: ...}``)
and the wildcard ``/**``; names may be nested mappings or dotted keys. The wildcard is applied
first, the node's own section over it, as ROS does.
"""

from __future__ import annotations

from collections.abc import Mapping
import math
from pathlib import Path
from typing import Any

from corridor_pid.core.config import Config, config_from_params
from corridor_pid.core.errors import ConfigError
from corridor_pid.core.params import ParamValue, SPECS
import yaml

NODE_NAME = 'corridor_pid'


def _read_yaml(path: str | Path) -> Any:
    try:
        text = Path(path).read_text(encoding='utf-8')
    except OSError as err:
        raise ConfigError(f'{path}: cannot read params file ({err.strerror})') from err
    try:
        return yaml.safe_load(text)
    except yaml.YAMLError as err:
        mark = getattr(err, 'problem_mark', None)
        where = f' at line {mark.line + 1}' if mark is not None else ''
        raise ConfigError(f'{path}: not valid YAML{where}') from err


def _flatten(tree: Mapping[str, Any], prefix: str, out: dict[str, object], path: str) -> None:
    for key, value in tree.items():
        if not isinstance(key, str):
            raise ConfigError(f'{path}: parameter name {key!r} is not a string')
        name = f'{prefix}{key}'
        if isinstance(value, Mapping) and name not in SPECS:
            _flatten(value, f'{name}.', out, path)
        else:
            if name in out:
                raise ConfigError(f'{path}: {name} is given twice')
            out[name] = value


def _node_sections(tree: Any, node_name: str, path: str) -> list[Mapping[str, Any]]:
    """Return the ros__parameters mappings that apply to the node, wildcard first."""
    if not isinstance(tree, Mapping):
        raise ConfigError(f'{path}: expected a mapping of node names at the top level')
    wildcard: list[Mapping[str, Any]] = []
    own: list[Mapping[str, Any]] = []

    def visit(mapping: Mapping[str, Any], trail: list[str]) -> None:
        for key, value in mapping.items():
            if not isinstance(value, Mapping):
                continue
            parts = [p for p in str(key).split('/') if p]
            here = trail + parts
            if 'ros__parameters' in value:
                params = value['ros__parameters']
                if params is None:
                    params = {}
                if not isinstance(params, Mapping):
                    raise ConfigError(f'{path}: {key}.ros__parameters must be a mapping')
                if here and here[-1] == '**' or str(key) == '/**':
                    wildcard.append(params)
                elif here and here[-1] == node_name:
                    own.append(params)
            else:
                visit(value, here)

    visit(tree, [])
    if not wildcard and not own:
        raise ConfigError(
            f"{path}: no '{node_name}: {{ros__parameters: ...}}' (or '/**') section")
    return wildcard + own


def params_from_file(path: str | Path, node_name: str = NODE_NAME) -> dict[str, object]:
    """Return the flat dotted-name parameters a params file gives the node (unvalidated)."""
    spath = str(path)
    tree = _read_yaml(path)
    merged: dict[str, object] = {}
    for section in _node_sections(tree, node_name, spath):
        flat: dict[str, object] = {}
        _flatten(section, '', flat, spath)
        merged.update(flat)
    if 'use_sim_time' in merged:
        merged.pop('use_sim_time')
    return merged


def load_params_file(path: str | Path, node_name: str = NODE_NAME) -> Config:
    """Return the validated :class:`Config` of a params file.

    Raises:
        ConfigError: unreadable file, bad YAML, or the first invalid parameter (prefixed
            with the file name).

    """
    flat = params_from_file(path, node_name)
    try:
        return config_from_params(flat)
    except ConfigError as err:
        raise ConfigError(f'{path}: {err}') from err


def _yaml_scalar(value: ParamValue) -> str:
    if isinstance(value, bool):
        return 'true' if value else 'false'
    if isinstance(value, float):
        text = repr(value)
        if math.isfinite(value) and 'e' not in text and '.' not in text:
            text += '.0'
        return text
    if isinstance(value, int):
        return str(value)
    if isinstance(value, str):
        return yaml.safe_dump(value, default_style="'").strip().removesuffix('...').strip()
    return '[' + ', '.join(_yaml_scalar(x) for x in value) + ']'


def params_yaml(values: Mapping[str, ParamValue] | Config, node_name: str = NODE_NAME,
                header: str = '') -> str:
    """Return ROS 2 params YAML text for ``values`` (nested by section, floats with '.')."""
    flat = values.as_params() if isinstance(values, Config) else dict(values)
    lines = [f'# {line}' if line else '#' for line in header.splitlines()]
    lines += [f'{node_name}:', '  ros__parameters:']
    sections: dict[str, list[tuple[str, ParamValue]]] = {}
    for name, value in flat.items():
        section, _, field = name.rpartition('.')
        sections.setdefault(section, []).append((field, value))
    for field, value in sections.pop('', []):
        lines.append(f'    {field}: {_yaml_scalar(value)}')
    for section, items in sections.items():
        lines.append(f'    {section}:')
        for field, value in items:
            lines.append(f'      {field}: {_yaml_scalar(value)}')
    return '\n'.join(lines) + '\n'


def write_params_file(path: str | Path, values: Mapping[str, ParamValue] | Config,
                      node_name: str = NODE_NAME, header: str = '') -> None:
    """Write a params file the node loads unchanged (validated first; atomic rename)."""
    flat = values.as_params() if isinstance(values, Config) else dict(values)
    config_from_params(flat)
    target = Path(path)
    tmp = target.with_name(target.name + '.tmp')
    tmp.write_text(params_yaml(flat, node_name, header), encoding='utf-8')
    tmp.replace(target)

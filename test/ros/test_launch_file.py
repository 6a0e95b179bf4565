# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""launch/corridor_pid.launch.py, checked by its structure.

The ROS launch system is not installable here (DESIGN §7), so the file is parsed: it
compiles, starts an executable the package installs, loads a config file the package
installs, and offers the params-file and pose-topic arguments.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest
from ros_helpers import REPO

LAUNCH = REPO / 'launch' / 'corridor_pid.launch.py'


def _tree() -> ast.Module:
    return ast.parse(LAUNCH.read_text(encoding='utf-8'), filename=str(LAUNCH))


def _calls(name: str) -> list[ast.Call]:
    """Return every call of ``name(...)`` in the launch file."""
    return [node for node in ast.walk(_tree()) if isinstance(node, ast.Call)
            and isinstance(node.func, ast.Name) and node.func.id == name]


def _keyword(call: ast.Call, name: str) -> ast.expr:
    for kw in call.keywords:
        if kw.arg == name:
            return kw.value
    raise AssertionError(f'{name}= missing')


def _console_scripts() -> dict[str, str]:
    """Return the console scripts setup.py declares (name -> target)."""
    setup = ast.parse((REPO / 'setup.py').read_text(encoding='utf-8'))
    for node in ast.walk(setup):
        if isinstance(node, ast.Dict):
            for key, value in zip(node.keys, node.values):
                if isinstance(key, ast.Constant) and key.value == 'console_scripts':
                    entries = ast.literal_eval(value)
                    return dict(
                        (part.strip() for part in entry.split('=', 1)) for entry in entries)
    raise AssertionError('no console_scripts in setup.py')


def test_launch_file_compiles_and_defines_the_entry_point() -> None:
    """It is valid Python with generate_launch_description()."""
    compile(LAUNCH.read_text(encoding='utf-8'), str(LAUNCH), 'exec')
    names = [node.name for node in _tree().body if isinstance(node, ast.FunctionDef)]
    assert 'generate_launch_description' in names


def test_starts_an_installed_executable_of_this_package() -> None:
    """The Node action names this package and an executable setup.py installs."""
    (node,) = _calls('Node')
    assert ast.literal_eval(_keyword(node, 'package')) == 'corridor_pid'
    executable = ast.literal_eval(_keyword(node, 'executable'))
    scripts = _console_scripts()
    assert scripts[executable] == 'corridor_pid.ros.node:main'
    assert ast.literal_eval(_keyword(node, 'name')) == 'corridor_pid'


def test_default_params_file_exists_and_is_installed() -> None:
    """The default params_file is config/corridor_pid.yaml of the package share folder."""
    (joined,) = _calls('PathJoinSubstitution')
    parts = [ast.literal_eval(e) for e in joined.args[0].elts[1:]]  # type: ignore[attr-defined]
    path = REPO.joinpath(*parts)
    assert path == REPO / 'config' / 'corridor_pid.yaml' and path.is_file()
    setup_text = (REPO / 'setup.py').read_text(encoding='utf-8')
    assert "files('config/*.yaml')" in setup_text
    assert "files('launch/*.launch.py')" in setup_text


@pytest.mark.parametrize('argument', ['params_file', 'pose_topic', 'use_sim_time'])
def test_declares_launch_arguments(argument: str) -> None:
    """The launch arguments the README names exist."""
    declared = [ast.literal_eval(call.args[0]) for call in _calls('DeclareLaunchArgument')]
    assert argument in declared


def test_params_file_and_pose_topic_reach_the_node() -> None:
    """The params_file argument is passed as parameters; pose is remapped to pose_topic."""
    (node,) = _calls('Node')
    source = ast.unparse(node)
    assert "LaunchConfiguration('params_file')" in ast.unparse(_keyword(node, 'parameters'))
    assert "('pose', LaunchConfiguration('pose_topic'))" in ast.unparse(
        _keyword(node, 'remappings'))
    assert 'use_sim_time' in source


def test_launch_file_is_under_the_installed_glob() -> None:
    """The file name matches the launch/*.launch.py glob setup.py installs."""
    assert Path('launch', LAUNCH.name).match('launch/*.launch.py')

# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The package as ROS and pip see it: colcon install tree, package.xml, the CLI's help."""

from __future__ import annotations

from collections.abc import Iterator
import importlib.metadata
import os
from pathlib import Path
import shutil
import subprocess
import sys
import types

from catkin_pkg.package import parse_package
import corridor_pid
from corridor_pid import cli
from corridor_pid.core.errors import ConfigError
import pytest

ROOT = Path(__file__).resolve().parents[1]
BIN = Path(sys.executable).parent

# What the tree holds besides Python code; each must be installed under share/corridor_pid.
DATA_PATTERNS = ('launch/*.launch.py', 'config/*.yaml', 'config/scenarios/*.yaml')

# Files and folders of a working tree that are not part of the package source.
NOT_SOURCE = (
    '.git', '.venv*', 'build', 'install', 'log', 'out', '__pycache__', '*.egg-info',
    '.pytest_cache', '.mypy_cache', '.ruff_cache', '.hypothesis')

EXEC_DEPENDS = {
    'rclpy', 'geometry_msgs', 'nav_msgs', 'std_msgs', 'std_srvs', 'diagnostic_msgs',
    'sensor_msgs', 'rosgraph_msgs', 'python3-numpy', 'python3-yaml'}
TEST_DEPENDS = {'ament_flake8', 'ament_pep257', 'python3-pytest'}

# The cautions README and every --help carry (RULES.md; DESIGN.md §1).
SAFETY_PHRASES = (
    'on a stand', 'low speed', 'emergency stop', 'not a safety-rated function',
    'local regulations', 'qualified safety assessment')


def tool(name: str) -> str:
    """Return the path of a console tool installed beside this Python (the venv's)."""
    path = BIN / name
    assert path.exists(), f'{name} is not installed beside {sys.executable}; run `make venv`'
    return str(path)


@pytest.fixture(scope='module')
def colcon_install(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Path]:
    """Build the package with colcon in a scratch workspace; return its install base."""
    workspace = tmp_path_factory.mktemp('ws')
    shutil.copytree(ROOT, workspace / 'src' / 'corridor_pid',
                    ignore=shutil.ignore_patterns(*NOT_SOURCE))
    env = {k: v for k, v in os.environ.items()
           if not k.startswith(('AMENT_', 'COLCON_', 'CMAKE_PREFIX_PATH'))}
    env['PATH'] = f'{BIN}{os.pathsep}{env.get("PATH", "")}'
    result = subprocess.run(
        [tool('colcon'), '--log-base', str(workspace / 'log'), 'build',
         '--base-paths', str(workspace / 'src'),
         '--build-base', str(workspace / 'build'),
         '--install-base', str(workspace / 'install'),
         '--event-handlers', 'console_direct+'],
        cwd=workspace, env=env, capture_output=True, text=True, timeout=600)
    assert result.returncode == 0, f'colcon build failed:\n{result.stdout}\n{result.stderr}'
    yield workspace / 'install'


def site_packages(install: Path) -> Path:
    """Return the install tree's site-packages folder of this Python version."""
    version = f'python{sys.version_info.major}.{sys.version_info.minor}'
    found = sorted((install / 'corridor_pid' / 'lib').glob(f'{version}/site-packages'))
    assert found, f'no lib/{version}/site-packages under {install / "corridor_pid"}'
    return found[0]


def test_colcon_install_tree_has_executables_and_index(colcon_install: Path) -> None:
    """The colcon build puts the executables in lib/corridor_pid and registers the package."""
    prefix = colcon_install / 'corridor_pid'
    for name in ('corridor-pid', 'corridor_pid_node', 'corridor_pid_sim'):
        script = prefix / 'lib' / 'corridor_pid' / name
        assert script.is_file(), f'missing {script}'
        assert os.access(script, os.X_OK), f'{script} is not executable'
    assert (prefix / 'share' / 'corridor_pid' / 'package.xml').read_bytes() == (
        ROOT / 'package.xml').read_bytes()
    marker = prefix / 'share' / 'ament_index' / 'resource_index' / 'packages' / 'corridor_pid'
    assert marker.is_file()
    assert (site_packages(colcon_install) / 'corridor_pid' / 'core' / '__init__.py').is_file()
    assert not (site_packages(colcon_install) / 'test').exists()


def test_colcon_install_tree_has_every_data_file(colcon_install: Path) -> None:
    """Every launch and config file of the tree is installed under share/corridor_pid."""
    share = colcon_install / 'corridor_pid' / 'share' / 'corridor_pid'
    expected = sorted(p.relative_to(ROOT) for pattern in DATA_PATTERNS for p in ROOT.glob(pattern))
    for relative in expected:
        assert (share / relative).read_bytes() == (ROOT / relative).read_bytes(), relative
    installed = sorted(p.relative_to(share) for pattern in DATA_PATTERNS
                       for p in share.glob(pattern))
    assert installed == expected


def test_colcon_installed_command_runs_from_the_install_tree(colcon_install: Path) -> None:
    """The installed corridor-pid runs, importing the package from the install tree."""
    env = dict(os.environ, PYTHONPATH=str(site_packages(colcon_install)))
    script = colcon_install / 'corridor_pid' / 'lib' / 'corridor_pid' / 'corridor-pid'
    result = subprocess.run([str(script), '--help'], env=env, cwd=colcon_install,
                            capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, result.stderr
    assert 'usage: corridor-pid' in result.stdout
    where = subprocess.run(
        [sys.executable, '-c', 'import corridor_pid; print(corridor_pid.__file__)'],
        env=env, cwd=colcon_install, capture_output=True, text=True, timeout=120)
    assert Path(where.stdout.strip()).is_relative_to(site_packages(colcon_install))


def test_package_xml_declares_format_licence_and_dependencies() -> None:
    """package.xml is valid format 3 (catkin_pkg, ROS's own parser) and lists the deps."""
    package = parse_package(str(ROOT / 'package.xml'))
    package.validate()
    assert package.name == 'corridor_pid'
    assert package.package_format == 3
    assert package.version == corridor_pid.__version__
    assert package.licenses == ['Apache-2.0']
    assert {dep.name for dep in package.exec_depends} == EXEC_DEPENDS
    assert {dep.name for dep in package.test_depends} == TEST_DEPENDS
    assert [e.content for e in package.exports if e.tagname == 'build_type'] == [
        'ament_python']


def test_installed_metadata_matches_package_xml() -> None:
    """The pip metadata (setup.py) carries the same version and both console scripts."""
    assert importlib.metadata.version('corridor_pid') == corridor_pid.__version__
    scripts = {entry.name: entry.value
               for entry in importlib.metadata.entry_points(group='console_scripts')
               if entry.value.startswith('corridor_pid.')}
    assert scripts == {
        'corridor-pid': 'corridor_pid.cli:main',
        'corridor_pid_node': 'corridor_pid.ros.node:main',
        'corridor_pid_sim': 'corridor_pid.ros.sim_node:main',
    }


def assert_cautions(text: str) -> None:
    """Assert that ``text`` carries every safety caution (line breaks ignored)."""
    flat = ' '.join(text.split())
    missing = [phrase for phrase in SAFETY_PHRASES if phrase not in flat]
    assert not missing, f'help text lacks {missing}'


@pytest.mark.parametrize('verb', [None, *cli.VERBS])
def test_every_help_exits_zero_with_the_safety_caution(
        verb: str | None, capsys: pytest.CaptureFixture[str]) -> None:
    """``corridor-pid [VERB] --help`` exits 0, shows examples and the safety caution."""
    argv = ['--help'] if verb is None else [verb, '--help']
    assert cli.main(argv) == 0
    out = capsys.readouterr().out
    assert out.startswith(f'usage: corridor-pid{"" if verb is None else " " + verb}')
    assert 'examples:' in out
    assert_cautions(out)


def test_readme_carries_the_safety_caution() -> None:
    """README states the same cautions as --help."""
    assert_cautions((ROOT / 'README.md').read_text(encoding='utf-8'))


def test_console_script_and_module_entry_run() -> None:
    """The installed `corridor-pid` script and `python -m corridor_pid` both answer."""
    for command in ([tool('corridor-pid'), '--version'],
                    [sys.executable, '-m', 'corridor_pid', '--version']):
        result = subprocess.run(command, capture_output=True, text=True, timeout=120)
        assert result.returncode == 0, result.stderr
        assert result.stdout.strip() == f'corridor-pid {corridor_pid.__version__}'


@pytest.mark.parametrize('argv', [[], ['fly'], ['tune', 'a.yaml'], ['simulate'],
                                  ['demo', '--ros-args', '-p', 'x:=1'],
                                  ['bench', '--rate', '-5']])
def test_usage_mistakes_exit_two(argv: list[str], capsys: pytest.CaptureFixture[str]) -> None:
    """Missing verb, unknown verb, missing argument or bad value: exit 2, no traceback."""
    assert cli.main(argv) == 2
    err = capsys.readouterr().err
    assert 'Traceback' not in err
    assert err.strip().splitlines()[-1].startswith('corridor-pid')


def stand_in_verb(monkeypatch: pytest.MonkeyPatch, verb: str, run: object) -> None:
    """Put a stand-in ``corridor_pid.commands.<verb>`` module whose run is ``run``."""
    module = types.ModuleType(f'corridor_pid.commands.{verb}')
    module.run = run  # type: ignore[attr-defined]
    monkeypatch.setitem(sys.modules, module.__name__, module)


def test_domain_error_is_one_line_and_exit_one(
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    """A CorridorPidError from a verb becomes one `ERROR: ...` line and exit code 1."""
    def run(args: object) -> int:
        raise ConfigError("gains.kp: must be >= 0.0, got -1.0\n(from 'bad.yaml')")

    stand_in_verb(monkeypatch, 'check', run)
    assert cli.main(['check', 'bad.yaml']) == 1
    captured = capsys.readouterr()
    assert captured.out == ''
    assert captured.err == "ERROR: gains.kp: must be >= 0.0, got -1.0 (from 'bad.yaml')\n"


def test_verb_gets_its_parsed_options(monkeypatch: pytest.MonkeyPatch) -> None:
    """The verb's run receives the parsed options and its return value is the exit code."""
    seen = []

    def run(args: object) -> int:
        seen.append(args)
        return 7

    stand_in_verb(monkeypatch, 'replay', run)
    assert cli.main(['replay', 'bagdir', '--pose-topic', '/odom', '--corridor-width', '2.4',
                     '--json']) == 7
    (args,) = seen
    assert (args.bag, args.pose_topic, args.corridor_width, args.json, args.params) == (
        'bagdir', '/odom', 2.4, True, None)


def test_missing_verb_module_is_one_line_and_exit_two(
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    """A verb whose module is absent from this build gives one error line and exit 2."""
    monkeypatch.setitem(sys.modules, 'corridor_pid.commands.bench', None)
    assert cli.main(['bench']) == 2
    err = capsys.readouterr().err
    assert err.startswith('ERROR: ') and err.count('\n') == 1 and 'bench' in err


def test_node_gets_the_ros_arguments_unchanged(monkeypatch: pytest.MonkeyPatch) -> None:
    """`corridor-pid node --ros-args ...` hands the ROS tail to corridor_pid.ros.node.main."""
    seen = []

    def main(args: list[str] | None = None) -> None:
        seen.append(args)

    module = types.ModuleType('corridor_pid.ros.node')
    module.main = main  # type: ignore[attr-defined]
    monkeypatch.setitem(sys.modules, module.__name__, module)
    tail = ['--ros-args', '--params-file', 'tuned.yaml', '-r', 'pose:=/odom']
    assert cli.main(['node', *tail]) == 0
    assert seen == [['corridor-pid', *tail]]

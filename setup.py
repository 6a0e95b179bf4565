# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Build and install corridor_pid (ament_python: colcon build, or pip in a venv)."""

from __future__ import annotations

from glob import glob
import os
import re

from setuptools import find_packages, setup

PACKAGE = 'corridor_pid'
HERE = os.path.dirname(os.path.abspath(__file__))


def read_version() -> str:
    """Return ``__version__`` of the package (one place: corridor_pid/__init__.py)."""
    with open(os.path.join(HERE, PACKAGE, '__init__.py'), encoding='utf-8') as init:
        match = re.search(r"^__version__ = '([^']+)'", init.read(), re.MULTILINE)
    if match is None:
        raise RuntimeError(f'no __version__ in {PACKAGE}/__init__.py')
    return match.group(1)


def files(pattern: str) -> list[str]:
    """Return the repository files matching ``pattern``, sorted (relative paths)."""
    return sorted(glob(pattern))


setup(
    name=PACKAGE,
    version=read_version(),
    description='Corridor and lane centring PID controller for wheeled vehicles on ROS 2, '
                'with simulator, bag replay, tuning and benchmark.',
    license='Apache-2.0',
    maintainer='corridor_pid contributors',
    maintainer_email='maintainers@corridor-pid.invalid',
    python_requires='>=3.10',
    packages=find_packages(exclude=['test', 'test.*']),
    package_data={PACKAGE: ['py.typed']},
    data_files=[
        ('share/ament_index/resource_index/packages', [f'resource/{PACKAGE}']),
        (f'share/{PACKAGE}', ['package.xml']),
        (f'share/{PACKAGE}/launch', files('launch/*.launch.py')),
        (f'share/{PACKAGE}/config', files('config/*.yaml')),
        (f'share/{PACKAGE}/config/scenarios', files('config/scenarios/*.yaml')),
    ],
    # rclpy and the message packages come from ROS (apt on a vehicle, ros-jazzy-* wheels in
    # the venv; see requirements/run.txt); they have no plain PyPI names to declare here.
    install_requires=['setuptools', 'numpy', 'PyYAML'],
    extras_require={
        'offline': ['rosbags', 'scipy', 'matplotlib', 'tqdm'],
        'test': [
            'pytest', 'hypothesis', 'control', 'scipy', 'rosbags', 'matplotlib', 'tqdm',
            'ruff', 'mypy', 'types-PyYAML', 'colcon-core', 'colcon-ros',
            'colcon-python-setup-py',
        ],
    },
    zip_safe=True,
    entry_points={
        'console_scripts': [
            'corridor-pid = corridor_pid.cli:main',
            'corridor_pid_node = corridor_pid.ros.node:main',
            'corridor_pid_sim = corridor_pid.ros.sim_node:main',
        ],
    },
)

# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The ``corridor-pid`` command: argument parsing and dispatch only.

Each verb lives in ``corridor_pid/commands/<verb>.py`` as ``run(args) -> int``; this module
builds the parser, imports the verb's module only when that verb runs (so ``--help`` and
the light verbs never pay for scipy, matplotlib, rosbags or rclpy), and turns a domain
error (``CorridorPidError``) into one ``ERROR: ...`` line on stderr and exit code 1.
``node`` hands everything from ``--ros-args`` on to ``corridor_pid.ros.node.main``.
"""

from __future__ import annotations

import argparse
from collections.abc import Callable, Sequence
import importlib
import os
import sys
import textwrap

from corridor_pid import __version__

PROG = 'corridor-pid'

VERBS = ('node', 'demo', 'simulate', 'replay', 'tune', 'check', 'bench')
"""Every verb, in the order ``--help`` lists them."""

POSE_TYPES = ('pose_stamped', 'pose_with_covariance', 'odometry')
"""Pose message kinds: PoseStamped, PoseWithCovarianceStamped, Odometry."""

TUNABLE = ('kp', 'ki', 'kd', 'lookahead')
"""What ``tune --free`` may vary: the three gains (``gains.*``) and ``lookahead``."""

ROS_ARGS = '--ros-args'

SAFETY = """\
safety:
  This software steers and drives real vehicles. Try every change in simulation and on
  recorded runs first, then on a stand with the wheels off the ground, then at low speed
  in a cleared area. Keep a hardware emergency stop within reach at all times. The pose
  watchdog is a convenience, not a safety-rated function: it does not replace a safety
  controller. Follow local regulations, and have a qualified safety assessment done
  before the vehicle runs near people."""

DESCRIPTION = """\
Hold a wheeled vehicle on the centre of a corridor or lane with a PID steering and speed
loop, and prove changes offline before the vehicle moves: simulate, replay recorded bags,
tune gains, check stability margins, measure this computer."""

EXAMPLES = """\
examples:
  corridor-pid demo --out out/demo           node + simulated cart over local DDS, report
  corridor-pid simulate config/scenarios/FILE.yaml --params config/corridor_pid.yaml
  corridor-pid replay run1/ --params tuned.yaml --json
  corridor-pid tune config/scenarios/*.yaml --params config/corridor_pid.yaml --out tuned.yaml
  corridor-pid check tuned.yaml               validate a params file, print its margins
  corridor-pid bench                          does this computer keep the deadline?
  corridor-pid node --ros-args --params-file config/corridor_pid.yaml
  ros2 run corridor_pid corridor_pid_node --ros-args --params-file tuned.yaml

Every verb has its own --help. Bad input gives one 'ERROR: ...' line and exit code 1;
a usage mistake gives exit code 2."""

VERB_HELP: dict[str, tuple[str, str, str]] = {
    # verb: (one-line summary, description, examples)
    'node': (
        'run the controller node (ROS 2)',
        'Run the corridor_pid controller node: subscribes to the pose, publishes cmd_vel, '
        'steering_angle, target_speed and /diagnostics, offers ~/enable. Everything from '
        '--ros-args on goes to ROS unchanged (params file, remappings, use_sim_time). '
        'Same as `ros2 run corridor_pid corridor_pid_node`.',
        '  corridor-pid node --ros-args --params-file config/corridor_pid.yaml\n'
        '  corridor-pid node --ros-args --params-file tuned.yaml -r pose:=/localization/pose\n'
        '  corridor-pid node --ros-args -p use_sim_time:=true -p start_enabled:=true'),
    'demo': (
        'node + simulated vehicle over local DDS, live retune, dropout, report',
        'Start the controller node and a simulated vehicle as separate processes on a '
        'private local DDS domain, retune a gain live, try an unsafe change, interrupt the '
        'pose stream past the watchdog timeout, and write a report (summary.json, run.csv, '
        'report.png, the bag folder run/ holding run.mcap, params.yaml) to --out. Replay '
        'the bag with `corridor-pid replay OUT/run --params OUT/params.yaml` (add '
        '--follow-recorded-sets to include the live retune). The exit code says whether '
        'the run met its goals.',
        '  corridor-pid demo\n'
        '  corridor-pid demo --fast --out /tmp/demo\n'
        '  corridor-pid demo --scenario config/scenarios/FILE.yaml --duration 30 --realtime'),
    'simulate': (
        'closed loop offline on a scenario; metrics, CSV, plot',
        'Run the controller core against the simulated vehicle of a scenario file '
        '(deterministic for its seed) and print the metrics. The scenario is the truth for '
        'the plant and sets the course and cruise speed; the params file sets the '
        'controller.',
        '  corridor-pid simulate config/scenarios/FILE.yaml\n'
        '  corridor-pid simulate config/scenarios/FILE.yaml --params tuned.yaml --json\n'
        '  corridor-pid simulate config/scenarios/FILE.yaml --plot run.png --csv run.csv'),
    'replay': (
        'score a recorded rosbag2 run through the controller core',
        'Read the pose topic of a rosbag2 bag (a directory; sqlite3 or MCAP), drive the '
        'controller core at the recorded stamps (enabled from the first pose; watchdog '
        'ticks on the recorded /clock when the bag holds one), print the metrics of the '
        'recorded path, and compare with the commands the bag holds. By default the params '
        'file alone sets the controller: what THESE params would have commanded. '
        '--follow-recorded-sets also applies the live parameter changes the bag recorded.',
        '  corridor-pid replay run1/\n'
        '  corridor-pid replay out/demo/run --params out/demo/params.yaml '
        '--follow-recorded-sets\n'
        '  corridor-pid replay run1/ --params tuned.yaml --pose-topic /odom --json\n'
        '  corridor-pid replay run1/ --corridor-width 2.4 --write run1_replayed/ --plot r.png'),
    'tune': (
        'tune gains over scenarios; write a params file and a report',
        'Optimise the gains in the closed-loop simulator over every given scenario, subject '
        'to stability-margin floors, and write a params file the node loads unchanged '
        '(a copy of --params with the tuned values) plus a report.',
        '  corridor-pid tune config/scenarios/*.yaml --out tuned.yaml\n'
        '  corridor-pid tune config/scenarios/FILE.yaml --params start.yaml --out tuned.yaml '
        '--free kp kd ki\n'
        '  corridor-pid tune config/scenarios/FILE.yaml --method relay --out relay.yaml'),
    'check': (
        'validate a params file; print stability margins for its vehicle',
        'Validate a params file exactly as the node would (same validator), then print the '
        'gain, phase and delay margins of the linearised loop at its cruise speed and over '
        'a speed range, with a plain verdict.',
        '  corridor-pid check config/corridor_pid.yaml\n'
        '  corridor-pid check tuned.yaml --json'),
    'bench': (
        'measure step cost, node latency, replay rate on this computer',
        'Measure on this computer: the controller step against a bare three-term PID, the '
        'node pose-to-command latency against a bare rclpy relay (local DDS, own domain), '
        'offline replay rate, and node CPU and memory; print a table or JSON with a verdict '
        'for the chosen control rate.',
        '  corridor-pid bench\n'
        '  corridor-pid bench --rate 100 --count 3000 --json'),
}


def _positive_float(text: str) -> float:
    """Parse a finite number > 0 (command-line value)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f'expected a number, got {text!r}') from None
    if not value > 0 or value == float('inf'):
        raise argparse.ArgumentTypeError(f'expected a finite number > 0, got {text!r}')
    return value


def _positive_int(text: str) -> int:
    """Parse an integer >= 1 (command-line value)."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f'expected a whole number, got {text!r}') from None
    if value < 1:
        raise argparse.ArgumentTypeError(f'expected a whole number >= 1, got {text!r}')
    return value


def _add_verb(
        verbs: argparse._SubParsersAction[argparse.ArgumentParser],
        name: str) -> argparse.ArgumentParser:
    """Add one verb's sub-parser with its summary, description, examples and cautions."""
    summary, description, examples = VERB_HELP[name]
    parser = verbs.add_parser(
        name, help=summary, description=textwrap.fill(description, width=79),
        epilog=f'examples:\n{examples}\n\n{SAFETY}',
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.set_defaults(verb=name)
    return parser


def _add_params(parser: argparse.ArgumentParser, what: str) -> None:
    """Add ``--params F``, the node's ROS 2 params YAML."""
    parser.add_argument(
        '--params', metavar='F',
        help=f'ROS 2 params YAML of the node (the file --params-file loads); {what}')


def _add_json(parser: argparse.ArgumentParser) -> None:
    """Add ``--json``: one JSON object on stdout instead of the readable text."""
    parser.add_argument(
        '--json', action='store_true',
        help='print one JSON object on stdout (metric keys per the README) instead of text')


def build_parser() -> argparse.ArgumentParser:
    """Return the ``corridor-pid`` argument parser with every verb and option."""
    parser = argparse.ArgumentParser(
        prog=PROG, description=DESCRIPTION, epilog=f'{EXAMPLES}\n\n{SAFETY}',
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument('--version', action='version', version=f'%(prog)s {__version__}')
    verbs = parser.add_subparsers(title='verbs', metavar='VERB')

    _add_verb(verbs, 'node')
    # The --ros-args tail is split off in main(); here it only shows in the usage line.

    demo = _add_verb(verbs, 'demo')
    demo.add_argument(
        '--scenario', metavar='S',
        help='scenario file to run (default: the shipped hospital-corridor delivery cart)')
    demo.add_argument(
        '--out', metavar='DIR', default='out/demo',
        help='folder for summary.json, run.csv, report.png, the bag folder run/ (rosbag2: '
             'run/run.mcap) and params.yaml (default: %(default)s)')
    demo.add_argument(
        '--duration', metavar='S', type=_positive_float,
        help="length of the run [s] (default: the scenario's duration)")
    pace = demo.add_mutually_exclusive_group()
    pace.add_argument(
        '--realtime', dest='pace', action='store_const', const='realtime',
        help='run at wall-clock pace (default)')
    pace.add_argument(
        '--fast', dest='pace', action='store_const', const='fast',
        help='run on simulated time (/clock) as fast as the machine allows')
    demo.set_defaults(pace='realtime')

    simulate = _add_verb(verbs, 'simulate')
    simulate.add_argument('scenario', metavar='SCENARIO', help='scenario YAML file')
    _add_params(simulate, 'default: the shipped config/corridor_pid.yaml defaults')
    _add_json(simulate)
    simulate.add_argument(
        '--plot', metavar='FILE.png', help='write a plot of the run (needs matplotlib)')
    simulate.add_argument(
        '--csv', metavar='FILE', help='write the trajectory and controller terms as CSV')

    replay = _add_verb(verbs, 'replay')
    replay.add_argument(
        'bag', metavar='BAG', help='rosbag2 bag directory (sqlite3 or MCAP storage)')
    _add_params(replay, 'default: the built-in defaults')
    replay.add_argument(
        '--pose-topic', metavar='T',
        help="topic that carries the pose (default: the bag's only pose-typed topic, "
             'else /pose)')
    replay.add_argument(
        '--pose-type', choices=POSE_TYPES,
        help='expected message kind of the pose topic (default: the type the bag records)')
    replay.add_argument(
        '--stamps', '--time-source', dest='stamps', choices=('header', 'receive'),
        default='header',
        help='pose stamps the controller sees: the message header stamps (default; the '
             "bag's receive times are the node clock) or the receive times (for poses "
             'recorded with empty or out-of-order stamps)')
    replay.add_argument(
        '--corridor-width', metavar='W', type=_positive_float,
        help='corridor width [m], for the `diverged` metric (null without it)')
    replay.add_argument(
        '--follow-recorded-sets', action='store_true',
        help="also apply the controller node's live parameter changes the bag recorded "
             '(/parameter_events) at their times, through the same validation, so a run '
             'retuned live replays to the commands it sent (default: these params only, '
             'what they would have commanded)')
    replay.add_argument(
        '--controller-node', metavar='NODE',
        help='with --follow-recorded-sets: the node whose changes to follow, e.g. '
             '/cart/corridor_pid (default: the only node whose recorded changes are '
             'controller parameters)')
    replay.add_argument(
        '--write', metavar='OUT',
        help='write a new bag: the original topics plus the replayed commands')
    _add_json(replay)
    replay.add_argument(
        '--plot', metavar='FILE.png', help='write a plot of the run (needs matplotlib)')

    tune = _add_verb(verbs, 'tune')
    tune.add_argument(
        'scenarios', metavar='SCENARIO', nargs='+', help='scenario YAML file(s) to tune over')
    _add_params(tune, 'the start point; the tuned file is a copy of it')
    tune.add_argument(
        '--out', metavar='F', required=True, help='where to write the tuned params file')
    tune.add_argument(
        '--method', choices=('optimize', 'relay'), default='optimize',
        help='optimize: scipy.optimize over the scenarios under margin floors (default); '
             'relay: relay experiment in simulation, then Ziegler-Nichols and '
             'Tyreus-Luyben rules')
    tune.add_argument(
        '--free', metavar='NAME', nargs='+', choices=TUNABLE, default=['kp', 'kd'],
        help=f'what the optimiser varies, from {", ".join(TUNABLE)} (default: kp kd)')
    tune.add_argument(
        '--seed', type=int, default=0,
        help='random seed; the same seed gives the same result (default: %(default)s)')
    tune.add_argument(
        '--jobs', metavar='N', type=_positive_int,
        help='scenario evaluations in parallel (default: the number of cores)')
    tune.add_argument(
        '--evaluations', metavar='N', type=_positive_int,
        help='candidate budget of the optimiser (default: 60 per free value)')
    _add_json(tune)
    tune.add_argument(
        '--plot', metavar='FILE.png', help='write a before/after plot (needs matplotlib)')

    check = _add_verb(verbs, 'check')
    check.add_argument('params_file', metavar='PARAMS', help='ROS 2 params YAML to check')
    _add_json(check)

    bench = _add_verb(verbs, 'bench')
    _add_json(bench)
    bench.add_argument(
        '--rate', metavar='HZ', type=_positive_float, default=100.0,
        help='control rate [Hz] to judge the node latency against (default: %(default)s)')
    bench.add_argument(
        '--count', metavar='N', type=_positive_int, default=3000,
        help='poses sent per latency measurement (default: %(default)s)')
    return parser


def _split_ros_args(argv: Sequence[str]) -> tuple[list[str], list[str]]:
    """Split argv at the first ``--ros-args``: (our arguments, the ROS tail)."""
    args = list(argv)
    if ROS_ARGS in args:
        at = args.index(ROS_ARGS)
        return args[:at], args[at:]
    return args, []


def _error(message: str) -> None:
    """Print one ``ERROR: ...`` line on stderr."""
    first_line = ' '.join(str(message).split())
    print(f'ERROR: {first_line}', file=sys.stderr)


def _load_runner(verb: str) -> Callable[[argparse.Namespace], int] | None:
    """Import ``corridor_pid.commands.<verb>`` and return its ``run``; None if absent."""
    module_name = f'corridor_pid.commands.{verb}'
    try:
        module = importlib.import_module(module_name)
    except ModuleNotFoundError as err:
        if err.name != module_name:
            raise
        return None
    runner: Callable[[argparse.Namespace], int] = module.run
    return runner


def _run_node(ros_args: list[str]) -> int:
    """Run the controller node with the ROS argument tail; return its exit code."""
    try:
        node = importlib.import_module('corridor_pid.ros.node')
    except ModuleNotFoundError as err:
        if err.name != 'corridor_pid.ros.node':
            raise
        _error(f"verb 'node' is not available in this build ({err.name!r} is missing)")
        return 2
    result = node.main(args=[PROG, *ros_args])
    return int(result or 0)


def main(argv: Sequence[str] | None = None) -> int:
    """Parse ``argv`` (default: ``sys.argv[1:]``), run the verb, return its exit code."""
    ours, ros_args = _split_ros_args(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args = parser.parse_args(ours)
        if not hasattr(args, 'verb'):
            parser.error(f'choose a verb: {", ".join(VERBS)}')
        if ros_args and args.verb != 'node':
            parser.error(f'{ROS_ARGS} is only understood by the node verb')
    except SystemExit as done:  # --help, --version and usage errors end here
        return done.code if isinstance(done.code, int) else (0 if done.code is None else 2)
    args.ros_args = ros_args

    from corridor_pid.core.errors import CorridorPidError, MissingExtraError

    try:
        if args.verb == 'node':
            return _run_node(ros_args)
        runner = _load_runner(args.verb)
        if runner is None:
            _error(f'verb {args.verb!r} is not available in this build yet '
                   f'(corridor_pid/commands/{args.verb}.py is missing)')
            return 2
        return int(runner(args))
    except CorridorPidError as err:
        _error(str(err))
        return 1
    except ModuleNotFoundError as err:
        # An optional extra that a verb imports at module level (the verb should import
        # it lazily and raise MissingExtraError itself; this is the safety net). A missing
        # module of our own is a bug, not a user mistake: let it show its traceback.
        if not err.name or err.name.split('.')[0] == 'corridor_pid':
            raise
        _error(str(MissingExtraError(err.name, 'offline')))
        return 1
    except KeyboardInterrupt:
        _error('interrupted')
        return 130
    except BrokenPipeError:
        # The reader went away (`corridor-pid simulate --json | head`): not an error of
        # ours. Point stdout at devnull so the interpreter's final flush stays quiet.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 141

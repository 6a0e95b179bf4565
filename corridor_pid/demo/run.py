# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The demo from start to report: processes, script, recording, outputs.

1. Prepare: load the scenario (default: the hospital-corridor delivery cart), the
   controller's params file (the shipped ``config/corridor_pid.yaml``) with the scenario's
   mission (course, cruise speed) and reliable pose QoS; write it to ``<out>/params.yaml``;
   work out the script (:mod:`corridor_pid.demo.script`).
2. Claim a private ROS domain id and keep DDS on loopback
   (:mod:`corridor_pid.ros.isolation`); start the controller node and the simulated vehicle
   as separate processes, each in a session of its own, logs in ``<out>/logs``.
3. Play the script through the demo's own node (:mod:`corridor_pid.ros.demo_driver`),
   recording the topics into ``<out>/run`` (rosbag2, MCAP), each message at the time it
   was sent on the run's clock (:mod:`corridor_pid.demo.logtimes`).
4. Stop the processes (SIGINT, SIGTERM, SIGKILL), on success, failure and Ctrl-C alike.
5. Write ``run.csv``, ``report.png`` and ``summary.json``; return the verdict.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
import contextlib
import dataclasses
import functools
import math
import os
from pathlib import Path
import shutil
import signal
import statistics
import sys
import time
from types import FrameType
from typing import Any, NamedTuple, TextIO

from corridor_pid.core.config import Config, config_from_params, default_config
from corridor_pid.core.errors import DemoError, MissingExtraError
from corridor_pid.core.paramsfile import load_params_file, write_params_file
from corridor_pid.demo.events import Event, goals_of, observed_events, retune_effect, state_changes
from corridor_pid.demo.plot import Counterfactual, write_report_png
from corridor_pid.demo.processes import ProcessGroup
from corridor_pid.demo.progress import Progress
from corridor_pid.demo.script import demo_script, DemoScript, ParamChange
from corridor_pid.demo.summary import summary_object, summary_text, write_summary
from corridor_pid.demo.table import run_metrics, run_table, RunTable, write_run_csv
from corridor_pid.demo.world import STATE_NAMES
from corridor_pid.sim.loop import controller_config, simulate
from corridor_pid.sim.scenario import load_scenario, Scenario
import numpy as np

__all__ = [
    'DEFAULT_SCENARIO', 'DemoOptions', 'DemoOutcome', 'OUTPUT_NAMES', 'run_demo',
    'shipped_file',
]

PACKAGE = 'corridor_pid'
DEFAULT_SCENARIO = 'config/scenarios/hospital_corridor_bay_exit.yaml'
DEFAULT_PARAMS = 'config/corridor_pid.yaml'

OUTPUT_NAMES = {
    'summary': 'summary.json',
    'csv': 'run.csv',
    'report': 'report.png',
    'bag': 'run',
    'params': 'params.yaml',
    'logs': 'logs',
}
"""The files and folders the demo writes in its output folder (replaced on every run)."""

POSE_READERS = 2
"""Subscriptions of the pose topic before the run starts: the controller and the recorder."""


class DemoOptions(NamedTuple):
    """What to run: scenario file (None: the default), output folder, duration, pace."""

    scenario: str | None
    out: str
    duration: float | None
    pace: str


class DemoOutcome(NamedTuple):
    """The run's verdict, the path of its summary, and the summary object."""

    ok: bool
    out: Path
    summary: dict[str, Any]


def shipped_file(relative: str) -> Path | None:
    """Return a file shipped with the package: the source checkout's, else the installed one.

    ``relative`` is the path in the repository (``config/...``); an install keeps it under
    ``share/corridor_pid/``.
    """
    here = Path(__file__).resolve().parents[2] / relative
    if here.is_file():
        return here
    installed = Path(sys.prefix) / 'share' / PACKAGE / relative
    if installed.is_file():
        return installed
    with contextlib.suppress(ImportError, LookupError, ValueError):
        from ament_index_python.packages import get_package_share_directory

        share = Path(get_package_share_directory(PACKAGE)) / relative
        if share.is_file():
            return share
    return None


def _require_extras() -> None:
    """Fail early (before any process starts) when an extra the demo needs is missing."""
    for module in ('rosbags', 'matplotlib'):
        try:
            __import__(module)
        except ImportError as err:
            raise MissingExtraError(module, 'offline') from err


def _demo_config(scenario: Scenario, params: Path | None) -> Config:
    base = load_params_file(params) if params is not None else default_config()
    # Lock-step needs every pose delivered: reliable QoS on the pose topic.
    return config_from_params({'pose_qos': 'reliable', 'start_enabled': False},
                              base=controller_config(scenario, base))


def _prepare_out(out: Path) -> None:
    """Create ``out`` and remove the outputs of an earlier run (only the demo's own)."""
    if out.exists() and not out.is_dir():
        raise DemoError(f'--out: {str(out)!r} exists and is not a folder')
    try:
        out.mkdir(parents=True, exist_ok=True)
        for name in OUTPUT_NAMES.values():
            target = out / name
            if target.is_dir() and not target.is_symlink():
                shutil.rmtree(target)
            elif target.exists() or target.is_symlink():
                target.unlink()
    except OSError as err:
        raise DemoError(f'--out: cannot prepare {str(out)!r} ({err.strerror})') from err


@contextlib.contextmanager
def _signals_as_flag(flag: list[int]) -> Iterator[None]:
    """Turn SIGINT and SIGTERM into a flag while the block runs (clean-up stays orderly)."""
    def on_signal(signum: int, frame: FrameType | None) -> None:
        flag.append(signum)

    previous = {sig: signal.signal(sig, on_signal) for sig in (signal.SIGINT, signal.SIGTERM)}
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)


class _Player:
    """Plays the script through the driver and logs what it did as events."""

    def __init__(self, driver: Any, script: DemoScript, config: Config, fast: bool,
                 note: Callable[[str], None]) -> None:
        self.driver = driver
        self.script = script
        self.config = config
        self.fast = fast
        self.note = note
        self.events: list[Event] = []

    def log(self, event: Event) -> None:
        self.events.append(event)
        self.note(f'  {event.time:7.2f} s  {event.text}')

    def now(self, at: float) -> float:
        return at if self.fast else self.driver.sim_time()

    def start(self) -> None:
        driver = self.driver
        driver.wait_for_hold(0.0)
        message = driver.enable(True)
        self.log(Event(0.0, 'enabled', f'controller enabled via ~/enable ({message})',
                       {'response': message}))
        driver.resume()

    def retune(self, at: float) -> None:
        change = self.script.retune
        ok, reason = self.driver.set_parameter(change.name, change.value)
        text = (f'retune {change.name} {self.script.retune_from:g} -> {change.value:g} '
                f'({change.why}): ' + ('applied' if ok else f'REFUSED: {reason}'))
        self.log(Event(self.now(at), 'retune', text,
                       {'name': change.name, 'from': self.script.retune_from,
                        'value': change.value, 'successful': ok, 'reason': reason}))

    def unsafe(self, at: float) -> None:
        names = sorted({c.name for c in self.script.unsafe})
        before = self.driver.parameters_in_force(names)
        for change in self.script.unsafe:
            self._try_unsafe(at, change, before)

    def _try_unsafe(self, at: float, change: ParamChange, before: dict[str, object]) -> None:
        ok, reason = self.driver.set_parameter(change.name, change.value)
        after = self.driver.parameters_in_force([change.name])[change.name]
        unchanged = after == before[change.name]
        outcome = (f'refused: {reason}' if not ok else 'ACCEPTED (it should not have been)')
        text = f'try {change.name} := {change.value:g} ({change.why}): {outcome}'
        if not unchanged:
            text += f'; value in force changed to {after!r}'
        self.log(Event(self.now(at), 'refused', text,
                       {'name': change.name, 'value': change.value, 'successful': ok,
                        'reason': reason, 'in_force': after, 'unchanged': unchanged,
                        'as_expected': (not ok) and bool(reason) and unchanged}))

    def blackout(self, at: float) -> None:
        self.driver.blackout(True)
        length = self.script.blackout_end - self.script.blackout_at
        self.log(Event(self.now(at), 'blackout',
                       f'pose stream cut for {length:g} s (watchdog.timeout '
                       f'{self.config.watchdog.timeout:g} s)', {'length': length}))

    def blackout_end(self, at: float) -> None:
        self.driver.blackout(False)
        self.log(Event(self.now(at), 'blackout_end', 'pose stream restored', {}))

    def play(self, end_timeout: float) -> None:
        script = self.script
        self.start()
        actions = ((script.retune_at, self.retune), (script.unsafe_at, self.unsafe),
                   (script.blackout_at, self.blackout),
                   (script.blackout_end, self.blackout_end))
        for at, action in actions:
            if self.fast:
                self.driver.wait_for_hold(at)
            else:
                self.driver.wait_for_time(at)
            action(at)
            if self.fast:
                self.driver.resume()
        self.driver.wait_for_end(end_timeout)


def _origin(rows: list[tuple[float, ...]], pose_delay: float, fast: bool) -> float:
    """Return the ROS time [s] of simulated time 0: 0 in the fast pace, else from stamps."""
    if fast:
        return 0.0
    stamp, t = STATE_NAMES.index('pose_stamp'), STATE_NAMES.index('time')
    offsets = [r[stamp] - (r[t] - pose_delay) for r in rows if math.isfinite(r[stamp])]
    return statistics.median(offsets) if offsets else 0.0


def _counterfactual(scenario: Scenario, config: Config, script: DemoScript
                    ) -> Counterfactual:
    """Return the offline simulation of the same run (outage included) without the retune."""
    window = (script.blackout_at, script.blackout_end)
    same = dataclasses.replace(scenario, duration=script.duration,
                               dropouts=(*scenario.dropouts, window))
    result = simulate(same, config)
    return Counterfactual(result.trace['t'], result.trace['lateral'],
                          f'without the retune (offline simulation, kp '
                          f'{config.gains.kp:g})')


def _lockstep(table: RunTable) -> dict[str, Any]:
    """Return how the poses were answered: slots, poses sent, answered in step, late clock."""
    c = table.columns
    node_time = c['node_time']
    answered = np.isfinite(node_time)
    late = np.abs(node_time[answered] - c['t'][answered]) > 1e-6
    return {'slots': len(table), 'poses_sent': int(np.isfinite(c['pose_stamp']).sum()),
            'answered': int(answered.sum()), 'answered_on_a_late_clock': int(late.sum())}


def run_demo(options: DemoOptions, stream: TextIO | None = None) -> DemoOutcome:
    """Run the demo (see the module docstring) and return its outcome.

    Raises:
        ScenarioError: a bad scenario file.
        ConfigError: a params file or mission the controller refuses.
        MissingExtraError: rosbags or matplotlib is not installed.
        DemoError: a child process exited early, DDS discovery timed out, or the output
            folder cannot be written.
        KeyboardInterrupt: SIGINT or SIGTERM (after every process was stopped).

    """
    err = stream if stream is not None else sys.stderr
    scenario_path = options.scenario or shipped_file(DEFAULT_SCENARIO)
    if scenario_path is None:
        raise DemoError(f'the default scenario {DEFAULT_SCENARIO!r} is not installed; '
                        'give one with --scenario')
    scenario = load_scenario(scenario_path)
    duration = options.duration if options.duration is not None else scenario.duration
    params_path = shipped_file(DEFAULT_PARAMS)
    config = _demo_config(scenario, params_path)
    script = demo_script(config, duration)
    fast = options.pace == 'fast'
    _require_extras()
    out = Path(options.out)
    _prepare_out(out)
    params_file = out / OUTPUT_NAMES['params']
    write_params_file(params_file, config, header=(
        f'corridor_pid demo: {params_path or "built-in defaults"} with the mission of '
        f'{Path(scenario_path).name} (course, cruise speed) and reliable pose QoS'))

    print(f'corridor_pid demo: {scenario.name} ({duration:g} s, {options.pace} pace)',
          file=err)
    if scenario.description:
        print(f'  {scenario.description}', file=err)
    started = time.monotonic()
    flag: list[int] = []
    with _signals_as_flag(flag):
        rows, terms, diagnostics, events, counts, timing, domain = _run_processes(
            scenario_path, out, params_file, duration, script, config, fast,
            scenario.pose_delay, flag, err)
    wall = time.monotonic() - started

    origin = _origin(rows, scenario.pose_delay, fast)
    changes = state_changes(diagnostics, origin)
    table = run_table(rows, terms, changes, config.steering.max_angle)
    if len(table) < 2:
        raise DemoError('the run produced no pose slots (see the logs in '
                        f'{str(out / OUTPUT_NAMES["logs"])!r})')
    metrics = run_metrics(table, scenario.corridor_width)
    events = sorted(events + observed_events(table, changes, script), key=lambda e: e.time)
    goals = goals_of(metrics, events)
    counterfactual = _counterfactual(scenario, config, script)
    c = table.columns
    effect = retune_effect(c['t'], c['lateral'], counterfactual, script)
    files: dict[str, Any] = {key: name for key, name in OUTPUT_NAMES.items()
                             if key != 'logs'}
    files['bag_file'] = f"{OUTPUT_NAMES['bag']}/{OUTPUT_NAMES['bag']}.mcap"
    files['logs'] = sorted(f'{OUTPUT_NAMES["logs"]}/{p.name}'
                           for p in (out / OUTPUT_NAMES['logs']).glob('*.log'))
    g = config.gains
    summary = summary_object(
        goals=goals, metrics=metrics, events=events, retune_effect=effect,
        run={'scenario': scenario.name, 'scenario_file': str(scenario_path),
             'description': scenario.description, 'pace': options.pace,
             'duration': duration, 'wall_seconds': round(wall, 3), 'ros_domain_id': domain,
             'params_file': str(params_path) if params_path else None,
             'controller': {'kp': g.kp, 'ki': g.ki, 'kd': g.kd, 'lookahead': config.lookahead,
                            'cruise': config.speed.cruise,
                            'watchdog_timeout': config.watchdog.timeout},
             'script': {'retune_at': script.retune_at, 'unsafe_at': script.unsafe_at,
                        'blackout': [script.blackout_at, script.blackout_end]}},
        messages=counts, lockstep=_lockstep(table), files=files,
        recording={'log_times': 'sent (run clock)', 'timed_by_send_time': timing.by_send_time,
                   'timed_by_receive_clock': timing.by_receive_clock})
    ok = bool(summary['verdict']['ok'])
    verdict = 'goals met' if ok else 'goals NOT met'
    write_run_csv(out / OUTPUT_NAMES['csv'], table)
    write_report_png(out / OUTPUT_NAMES['report'], table, scenario, config, script, events,
                     metrics, counterfactual,
                     f'corridor_pid demo: {scenario.name}, {options.pace} pace - {verdict}')
    write_summary(out / OUTPUT_NAMES['summary'], summary)
    print(summary_text(summary, out), file=err)
    return DemoOutcome(ok, out, summary)


def _run_processes(scenario_path: str | os.PathLike[str], out: Path, params_file: Path,
                   duration: float, script: DemoScript, config: Config, fast: bool,
                   pose_delay: float, flag: list[int], err: TextIO) -> tuple[Any, ...]:
    """Start the processes, play the script, stop everything; return what was heard."""
    from corridor_pid.demo.logtimes import log_times
    from corridor_pid.demo.recording import BagRecorder
    from corridor_pid.ros import isolation
    from corridor_pid.ros.demo_driver import DemoDriver, message_types, recorded_topics
    import rclpy
    from rclpy.context import Context
    from rclpy.signals import SignalHandlerOptions
    from rclpy.utilities import try_shutdown

    domain = isolation.isolate_this_process()
    env = isolation.local_dds_env()
    python = sys.executable
    node_args = [python, '-m', 'corridor_pid.ros.node', '--ros-args', '--params-file',
                 str(params_file)]
    sim_args = [python, '-m', 'corridor_pid.ros.sim_node', str(scenario_path), '--pace',
                'fast' if fast else 'realtime', '--duration', repr(duration),
                '--pose-readers', str(POSE_READERS)]
    if fast:
        node_args += ['-p', 'use_sim_time:=true']
        for t in script.holds():
            sim_args += ['--hold', repr(t)]
    progress = Progress(duration, err)
    recorder = BagRecorder(out / OUTPUT_NAMES['bag'], message_types(recorded_topics(
        'pose_stamped', fast)))
    context = Context()
    driver: Any = None
    events: list[Event] = []
    procs = ProcessGroup(out / OUTPUT_NAMES['logs'], env)
    try:
        procs.start('controller', node_args)
        procs.start('sim_vehicle', sim_args)
        rclpy.init(context=context, signal_handler_options=SignalHandlerOptions.NO)

        def check() -> None:
            if flag:
                raise KeyboardInterrupt
            procs.check_running()

        lateral = STATE_NAMES.index('lateral')

        def on_row(row: tuple[float, ...]) -> None:
            state = driver.diagnostics[-1][1] if driver.diagnostics else ''
            progress.update(row[0], row[lateral], state)

        driver = DemoDriver(context, recorder, use_sim_time=fast, check=check, on_row=on_row)
        progress.note(f'  starting the controller and the simulated vehicle (ROS domain '
                      f'{domain}, localhost only)')
        driver.wait_for_graph(POSE_READERS)
        player = _Player(driver, script, config, fast, progress.note)
        events = player.events
        player.play(end_timeout=600.0 if fast else 2.0 * duration + 60.0)
        progress.update(duration, driver.rows[-1][lateral] if driver.rows else 0.0,
                        driver.diagnostics[-1][1] if driver.diagnostics else '', force=True)
    finally:
        progress.close()
        codes = procs.stop_all()
        if driver is not None:
            driver.close()
        origin = _origin(driver.rows if driver is not None else [], pose_delay, fast)
        recorder.close(functools.partial(log_times, origin_ns=round(origin * 1e9),
                                         wheelbase=config.vehicle.wheelbase))
        try_shutdown(context=context)
    bad = {name: code for name, code in codes.items() if code not in (0, -signal.SIGINT)}
    if bad:
        print(f'  note: exit codes {bad} (see {out / OUTPUT_NAMES["logs"]})', file=err)
    return (driver.rows, driver.terms, driver.diagnostics, events, dict(recorder.counts),
            recorder.timing, domain)

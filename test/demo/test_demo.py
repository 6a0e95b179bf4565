# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The demo end to end: real controller node and simulated vehicle over local DDS.

One fast-pace run (simulated time, lock-step) of the default scenario for 20 s is made for
the module; the tests read what it left: summary.json, run.csv, report.png and the rosbag2
recording (read with rosbags, the reference reader). A second test interrupts a real-time
run and checks that no process survives.
"""

from __future__ import annotations

import csv
import dataclasses
import json
import os
from pathlib import Path
import signal
import struct
import subprocess
import sys
import time
from typing import Any, NamedTuple

from corridor_pid.core.paramsfile import load_params_file
from corridor_pid.demo.table import csv_header, RUN_COLUMNS
from corridor_pid.sim.loop import simulate
from corridor_pid.sim.metrics import METRIC_UNITS
from corridor_pid.sim.scenario import load_scenario
import numpy as np
import pytest

pytestmark = [pytest.mark.dds, pytest.mark.slow]

DURATION = 20.0
RATE = 50.0            # pose_rate of the default scenario [Hz]
DELAY = 0.02           # pose_delay of the default scenario [s]
REPO = Path(__file__).resolve().parents[2]
RUN_TIMEOUT = 900.0    # only a hung run gets near this; the test asserts no timing


class Run(NamedTuple):
    """A finished demo run: its folder, exit code, stderr and summary."""

    out: Path
    code: int
    stderr: str
    summary: dict[str, Any]


def demo_command(*args: str) -> list[str]:
    """Return the command line of ``corridor-pid demo`` with this interpreter."""
    return [sys.executable, '-m', 'corridor_pid', 'demo', *args]


@pytest.fixture(scope='module')
def run(tmp_path_factory: pytest.TempPathFactory, ros_domain_id: int) -> Run:
    """Run the demo once in the fast pace for :data:`DURATION` seconds."""
    out = tmp_path_factory.mktemp('demo') / 'out'
    done = subprocess.run(
        demo_command('--fast', '--duration', repr(DURATION), '--out', str(out)),
        cwd=REPO, env=dict(os.environ), capture_output=True, text=True,
        timeout=RUN_TIMEOUT, check=False)
    summary_path = out / 'summary.json'
    assert summary_path.is_file(), done.stderr
    return Run(out, done.returncode, done.stderr,
               json.loads(summary_path.read_text(encoding='utf-8')))


def test_demo_meets_its_goals(run: Run) -> None:
    """Exit 0, every goal met, and the summary on stderr names where the files are."""
    assert run.code == 0, run.stderr
    verdict = run.summary['verdict']
    assert verdict['ok'] is True
    assert set(verdict['goals']) == {'no_divergence', 'retune_applied', 'unsafe_refused',
                                     'watchdog_stop', 'recovered'}
    assert all(goal['ok'] for goal in verdict['goals'].values())
    assert 'demo met its goals' in run.stderr
    assert str(run.out) in run.stderr


def test_metrics_have_the_contract_names_and_stay_in_bounds(run: Run) -> None:
    """The section 5 metrics, within bounds a delivery cart in a 2.4 m corridor must keep."""
    m = run.summary['metrics']
    assert set(m) == set(METRIC_UNITS)
    assert m['diverged'] is False
    # Starts 0.4 m off centre nosed 0.25 rad at the wall: it must turn before 0.6 m.
    assert 0.4 <= m['max_lateral_error'] < 0.6
    assert m['final_lateral_error'] < 0.1
    assert m['rms_lateral_error'] < 0.25
    assert m['watchdog_stops'] == 1
    assert 0.4 < m['mean_speed'] <= 1.0        # mission cruise 1.0 m/s, one stop
    assert m['steering_saturated_fraction'] < 0.25
    assert 0.0 <= m['steering_rate_saturated_fraction'] <= 1.0


def test_events_show_retune_refusals_stop_and_recovery_in_order(run: Run) -> None:
    """Retune applied and in force; three refusals with reasons; stop inside the outage."""
    events = run.summary['events']
    by_kind: dict[str, list[dict[str, Any]]] = {}
    for event in events:
        by_kind.setdefault(event['kind'], []).append(event)
    assert [e['t'] for e in events] == sorted(e['t'] for e in events)
    retune = by_kind['retune'][0]
    assert retune['successful'] is True and retune['name'] == 'gains.kp'
    assert retune['value'] > retune['from']
    assert by_kind['retune_in_force'][0]['t'] >= retune['t']
    refused = {e['name'] if e['value'] >= 0 else 'negative': e for e in by_kind['refused']}
    assert set(refused) == {'steering.max_angle', 'negative', 'gains.kp'}
    assert all(e['successful'] is False and e['unchanged'] is True for e in refused.values())
    assert 'read-only' in refused['steering.max_angle']['reason']
    assert 'range' in refused['negative']['reason']
    assert 'stability guard' in refused['gains.kp']['reason']
    outage = by_kind['blackout'][0]['t'], by_kind['blackout_end'][0]['t']
    stop = by_kind['watchdog_stop'][0]['t']
    back = by_kind['recovered'][0]['t']
    timeout = run.summary['run']['controller']['watchdog_timeout']
    # Stopped no earlier than the timeout after the last pose, and before poses return.
    assert outage[0] + timeout <= stop < outage[1]
    assert back > outage[1]


def test_run_before_the_retune_equals_the_offline_simulation(run: Run) -> None:
    """Lock-step over DDS steps the same core at the same instants as the offline loop.

    Until the first live change the demo's true path must be the offline simulator's
    (corridor_pid.sim.loop) for the same scenario and params file, to float precision.
    """
    table = read_csv(run.out / 'run.csv')
    config = load_params_file(run.out / 'params.yaml')
    scenario = load_scenario(run.summary['run']['scenario_file'])
    outage = tuple(run.summary['run']['script']['blackout'])
    offline = simulate(dataclasses.replace(scenario, duration=DURATION,
                                           dropouts=(outage,)), config)
    t = table['t']
    assert np.allclose(offline.trace['t'], t, atol=1e-12)
    before = t < run.summary['run']['script']['retune_at']
    gap = np.abs(offline.trace['lateral'][before] - table['lateral'][before])
    assert gap.max() < 1e-6
    # After the retune the live run holds the centre better than the run without it.
    effect = run.summary['retune_effect']
    assert effect['live_rms'] < effect['without_retune_rms']


def read_csv(path: Path) -> dict[str, np.ndarray]:
    """Return the columns of run.csv (state as strings, empty cells as NaN)."""
    with open(path, encoding='utf-8', newline='') as handle:
        rows = list(csv.reader(handle))
    header, body = rows[0], rows[1:]
    columns: dict[str, np.ndarray] = {}
    for i, name in enumerate(header):
        cells = [row[i] for row in body]
        if name == 'state':
            columns[name] = np.array(cells)
        else:
            columns[name] = np.array([float(c) if c else np.nan for c in cells])
    return columns


def test_csv_columns_match_the_documented_header(run: Run) -> None:
    """Header = RUN_COLUMNS names; one row per pose slot plus t = 0; values parse."""
    with open(run.out / 'run.csv', encoding='utf-8', newline='') as handle:
        header = next(csv.reader(handle))
    assert header == csv_header() == [name for name, _, _ in RUN_COLUMNS]
    table = read_csv(run.out / 'run.csv')
    slots = round((DURATION - DELAY) * RATE) + 1
    assert len(table['t']) == slots + 1 == run.summary['lockstep']['slots']
    assert set(table['state']) <= {'disabled', 'waiting', 'tracking', 'stopped', 'finished'}
    assert np.all(np.diff(table['t']) > 0)
    for name in ('x', 'y', 'lateral', 'steer', 'speed', 'p', 'kp'):
        assert np.all(np.isfinite(table[name])), name


def png_size(data: bytes) -> tuple[int, int]:
    """Return (width, height) from a PNG's IHDR chunk.

    PNG specification (W3C, 2nd ed. 2003), sections 5.2 and 11.2.2: the 8-byte signature,
    then the IHDR chunk (length, type, width, height as 4-byte big-endian integers).
    """
    assert data[:8] == b'\x89PNG\r\n\x1a\n'
    length, kind = struct.unpack('>I4s', data[8:16])
    assert kind == b'IHDR' and length == 13
    width, height = struct.unpack('>II', data[16:24])
    return width, height


def test_report_png_is_a_real_picture_of_sensible_size(run: Run) -> None:
    """report.png: valid PNG, a sensible size, decodes to a picture that is not blank."""
    import matplotlib.image

    data = (run.out / 'report.png').read_bytes()
    width, height = png_size(data)
    assert 800 <= width <= 4000 and 600 <= height <= 4000
    assert len(data) > 30_000
    pixels = matplotlib.image.imread(str(run.out / 'report.png'))
    assert pixels.shape[:2] == (height, width)
    assert float(np.std(pixels[..., :3])) > 0.05


EXPECTED_TOPICS = {
    '/pose': 'geometry_msgs/msg/PoseStamped',
    '/steering_angle': 'std_msgs/msg/Float64',
    '/target_speed': 'std_msgs/msg/Float64',
    '/cmd_vel': 'geometry_msgs/msg/TwistStamped',
    '/corridor_pid/terms': 'std_msgs/msg/Float64MultiArray',
    '/diagnostics': 'diagnostic_msgs/msg/DiagnosticArray',
    '/corridor_pid_sim/state': 'std_msgs/msg/Float64MultiArray',
    '/parameter_events': 'rcl_interfaces/msg/ParameterEvent',
    '/clock': 'rosgraph_msgs/msg/Clock',
}


def test_recording_is_a_rosbag2_mcap_with_counts_consistent_with_the_rate(run: Run) -> None:
    """Rosbags reads the bag: every topic, pose count = rate x (duration - outage)."""
    from rosbags.rosbag2 import Reader
    from rosbags.typesys import get_typestore, Stores

    bag = run.out / run.summary['files']['bag']
    assert (bag / 'metadata.yaml').is_file() and (bag / f'{bag.name}.mcap').is_file()
    store = get_typestore(Stores.ROS2_JAZZY)
    with Reader(bag) as reader:
        topics = {c.topic: c.msgtype for c in reader.connections}
        counts = {c.topic: c.msgcount for c in reader.connections}
        poses = [store.deserialize_cdr(raw, conn.msgtype)
                 for conn, _, raw in reader.messages(
                     [c for c in reader.connections if c.topic == '/pose'])]
    assert topics == EXPECTED_TOPICS
    outage = run.summary['run']['script']['blackout']
    lost = round((outage[1] - outage[0]) * RATE)
    expected = round((DURATION - DELAY) * RATE) + 1 - lost
    assert counts['/pose'] == len(poses) == expected == run.summary['lockstep']['poses_sent']
    assert counts == run.summary['messages']
    # Every answered pose gives one terms message; every cycle the three command topics.
    assert counts['/corridor_pid/terms'] == run.summary['lockstep']['answered']
    assert counts['/corridor_pid/terms'] >= counts['/pose'] - 5    # recovery_count poses
    assert counts['/steering_angle'] == counts['/target_speed'] == counts['/cmd_vel']
    assert counts['/steering_angle'] >= counts['/corridor_pid/terms']
    stamps = np.array([p.header.stamp.sec + p.header.stamp.nanosec * 1e-9 for p in poses])
    gaps = np.diff(stamps)
    assert np.all(gaps > 0)
    assert np.isclose(gaps.max(), outage[1] - outage[0] + 1.0 / RATE, atol=1e-6)
    assert np.allclose(np.sort(gaps)[:-1], 1.0 / RATE, atol=1e-6)


def test_bag_times_are_when_the_messages_were_sent(run: Run) -> None:
    """Every /pose at its stamp + pose_delay; commands at the node time they carry.

    The bag's log time of a pose is when the controller took it: in the lock-step fast
    pace, pose_delay after it was measured. Every message is timed from the run, none by
    the recorder's own (lagging) clock.
    """
    from rosbags.rosbag2 import Reader
    from rosbags.typesys import get_typestore, Stores

    store = get_typestore(Stores.ROS2_JAZZY)
    late: list[float] = []
    commands: list[float] = []
    with Reader(run.out / 'run') as reader:
        wanted = [c for c in reader.connections if c.topic in ('/pose', '/cmd_vel')]
        for conn, ns, raw in reader.messages(wanted):
            msg = store.deserialize_cdr(raw, conn.msgtype)
            sent = msg.header.stamp.sec * 1_000_000_000 + msg.header.stamp.nanosec
            (late if conn.topic == '/pose' else commands).append((ns - sent) * 1e-9)
    assert len(late) == run.summary['messages']['/pose']
    np.testing.assert_allclose(late, DELAY, atol=1e-3)
    assert np.all(np.asarray(commands) == 0.0)
    assert run.summary['recording']['timed_by_receive_clock'] == 0


def _replay(run: Run, *extra: str) -> dict[str, Any]:
    """Return ``corridor-pid replay --json`` of the demo's bag with its params file."""
    done = subprocess.run(
        [sys.executable, '-m', 'corridor_pid', 'replay', str(run.out / 'run'), '--params',
         str(run.out / 'params.yaml'), '--corridor-width', '2.4', '--json', *extra],
        cwd=REPO, capture_output=True, text=True, timeout=300, check=False)
    assert done.returncode == 0, done.stderr
    scores: dict[str, Any] = json.loads(done.stdout)
    return scores


def _recorded_minus_replayed(run: Run, *extra: str) -> tuple[np.ndarray, np.ndarray]:
    """Return (time [s], recorded minus replayed steering [rad]) of every steering message.

    The replay writes its commands into a copy of the bag (``--write``) at the step times;
    each recorded steering_angle is paired with the replayed command in force at its time.
    """
    from rosbags.rosbag2 import Reader

    written = run.out.parent / f"replayed{'-'.join(('', *extra))}"
    if not written.exists():
        _replay(run, '--write', str(written), *extra)
    series: dict[str, tuple[list[int], list[float]]] = {
        '/steering_angle': ([], []), '/replay/steering_angle': ([], [])}
    with Reader(written) as reader:
        wanted = [c for c in reader.connections if c.topic in series]
        for conn, ns, raw in reader.messages(wanted):
            series[conn.topic][0].append(ns)
            series[conn.topic][1].append(struct.unpack('<d', raw[4:12])[0])
    rec_t, rec_v = (np.asarray(v) for v in series['/steering_angle'])
    rep_t, rep_v = (np.asarray(v) for v in series['/replay/steering_angle'])
    index = np.searchsorted(rep_t, rec_t, side='right') - 1
    assert index.min() >= 0
    return rec_t * 1e-9, rec_v - rep_v[index]


def test_replay_of_the_recording_agrees_until_the_live_retune(run: Run) -> None:
    """The demo's params replay the recorded commands message for message until the retune.

    ``replay`` (what THESE params command) steps the same core at the recorded times: up to
    the live retune every recorded steering command is the replayed one (1e-6 rad), and
    the run has the live run's single watchdog stop.
    """
    scores = _replay(run)
    assert scores['watchdog_stops'] == 1 == run.summary['metrics']['watchdog_stops']
    t, diff = _recorded_minus_replayed(run)
    retune_at = run.summary['run']['script']['retune_at']
    before = t < retune_at
    assert before.sum() >= (retune_at - DELAY) * RATE - 1     # one command per pose
    assert np.abs(diff[before]).max() < 1e-6
    # After the live retune the params file is no longer what the node ran.
    assert np.abs(diff[~before]).max() > 1e-3


def test_following_the_recorded_sets_replays_the_whole_run(run: Run) -> None:
    """With the live retune followed, every recorded command comes back (1e-6), outage too.

    ``replay --follow-recorded-sets`` applies the node's recorded /parameter_events at their
    times; the bag's /clock puts the replay's watchdog ticks where the node's timer fired,
    so the stop and the ramp down during the outage agree as well.
    """
    scores = _replay(run, '--follow-recorded-sets')
    retune = next(e for e in run.summary['events'] if e['kind'] == 'retune')
    assert scores['recorded_sets'] == {'node': '/corridor_pid', 'applied': [
        {'time': pytest.approx(retune['t'] - DELAY, abs=1e-9),
         'values': {retune['name']: retune['value']}}]}
    assert scores['ticks'] == 'clock'
    assert scores['watchdog_stops'] == 1
    for channel in ('steering', 'speed', 'yaw_rate'):
        assert scores['comparison'][channel]['max_difference'] < 1e-6, channel
    t, diff = _recorded_minus_replayed(run, '--follow-recorded-sets')
    assert len(t) == run.summary['messages']['/steering_angle']
    assert np.abs(diff).max() < 1e-6


def test_replay_verb_reads_the_recording(run: Run) -> None:
    """``corridor-pid replay`` scores the demo's bag with its params file."""
    done = subprocess.run(
        [sys.executable, '-m', 'corridor_pid', 'replay', str(run.out / 'run'), '--params',
         str(run.out / 'params.yaml'), '--corridor-width', '2.4', '--json'],
        cwd=REPO, capture_output=True, text=True, timeout=300, check=False)
    assert done.returncode == 0, done.stderr
    scores = json.loads(done.stdout)
    assert set(METRIC_UNITS) <= set(scores)


def _children(pid: int) -> list[int]:
    """Return the PIDs whose parent is ``pid`` (Linux /proc)."""
    found = []
    for entry in Path('/proc').iterdir():
        if not entry.name.isdigit():
            continue
        try:
            fields = (entry / 'stat').read_text().rsplit(')', 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid:
            found.append(int(entry.name))
    return found


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    return True


def test_ctrl_c_stops_every_process(tmp_path: Path) -> None:
    """SIGINT during a real-time run: exit 130 and neither child process survives."""
    out = tmp_path / 'out'
    with open(tmp_path / 'stderr.txt', 'wb') as err:
        demo = subprocess.Popen(demo_command('--duration', '30', '--out', str(out)),
                                cwd=REPO, stdout=subprocess.DEVNULL, stderr=err)
    try:
        log = out / 'logs' / 'controller.log'
        deadline = time.monotonic() + RUN_TIMEOUT
        while not (log.is_file() and 'waiting -> tracking' in log.read_text()):
            assert demo.poll() is None, (tmp_path / 'stderr.txt').read_text()
            assert time.monotonic() < deadline, 'the run never started tracking'
            time.sleep(0.05)
        children = _children(demo.pid)
        assert len(children) == 2
        demo.send_signal(signal.SIGINT)
        code = demo.wait(timeout=120)
    finally:
        if demo.poll() is None:
            demo.kill()
            demo.wait()
    assert code == 130
    assert 'ERROR: interrupted' in (tmp_path / 'stderr.txt').read_text()
    assert not [pid for pid in children if _alive(pid)]

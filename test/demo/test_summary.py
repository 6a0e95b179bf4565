# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""summary.json and the printed summary: strict JSON, metrics with units, goals, files."""

from __future__ import annotations

import json
import math
from pathlib import Path

from corridor_pid.demo.events import Event, Goal
from corridor_pid.demo.summary import summary_object, summary_text, write_summary
from corridor_pid.sim.metrics import Metrics

METRICS = Metrics(rms_lateral_error=0.0412, max_lateral_error=0.458, final_lateral_error=0.002,
                  overshoot=0.108, settling_time=17.7, steering_saturated_fraction=0.125,
                  steering_rate_saturated_fraction=0.0, watchdog_stops=1, diverged=False,
                  mean_speed=0.83)


def summary(ok: bool = True) -> dict[str, object]:
    """Return a summary object of an invented run."""
    return summary_object(
        goals={'no_divergence': Goal(True, 'max 0.458 m'), 'recovered': Goal(ok, 'why')},
        metrics=METRICS,
        events=[Event(4.0, 'retune', 'retune gains.kp 0.8 -> 1.28: applied',
                      {'successful': True, 'score': math.nan})],
        retune_effect={'gain': 'gains.kp', 'from': 0.8, 'to': 1.28, 'window': [4.0, 40.0],
                       'live_rms': 0.033, 'without_retune_rms': 0.05, 'live_overshoot': 0.1,
                       'without_retune_overshoot': math.inf},
        run={'pace': 'fast', 'duration': 40.0, 'wall_seconds': 9.5},
        messages={'/pose': 1875}, lockstep={'answered': 1871},
        files={'summary': 'summary.json', 'logs': ['logs/a.log', 'logs/b.log']})


def test_summary_json_is_strict_json(tmp_path: Path) -> None:
    """NaN and infinity become null, so any JSON reader takes the file (RFC 8259)."""
    path = tmp_path / 'summary.json'
    write_summary(path, summary())
    text = path.read_text(encoding='utf-8')
    data = json.loads(text, parse_constant=lambda name: (_ for _ in ()).throw(
        ValueError(f'non-standard JSON constant {name}')))
    assert data['events'][0]['score'] is None
    assert data['retune_effect']['without_retune_overshoot'] is None
    assert data['metrics']['watchdog_stops'] == 1 and data['metrics']['diverged'] is False
    assert data['verdict']['ok'] is True


def test_verdict_is_the_and_of_the_goals() -> None:
    """One goal not met makes the verdict false, and the text says which."""
    failed = summary(ok=False)
    assert failed['verdict']['ok'] is False   # type: ignore[index]
    text = summary_text(failed, Path('out/demo'))
    assert 'NOT MET  recovered' in text and 'did NOT meet its goals' in text


def test_text_shows_metrics_with_units_events_and_files() -> None:
    """Metrics with units (fractions in %), the retune effect, events, goals and files."""
    text = summary_text(summary(), Path('out/demo'))
    assert 'rms_lateral_error                  0.041 m' in text
    assert 'steering_saturated_fraction        12.5 %' in text
    assert 'diverged                           no' in text
    assert 'RMS lateral error   0.033 m / 0.050 m' in text
    assert '   4.00 s  retune gains.kp 0.8 -> 1.28: applied' in text
    assert 'logs/a.log, logs/b.log' in text and 'files in out/demo' in text
    assert 'demo met its goals (fast pace, 40 s simulated in 9.5 s)' in text


def test_text_says_how_to_replay_the_recording() -> None:
    """With a bag and a params file among the files: the replay command line for them."""
    with_bag = summary()
    with_bag['files'] = {'bag': 'run', 'params': 'params.yaml'}
    text = summary_text(with_bag, Path('out/demo'))
    assert 'corridor-pid replay out/demo/run --params out/demo/params.yaml' in text
    assert '--follow-recorded-sets' in text
    assert 'corridor-pid replay' not in summary_text(summary(), Path('out/demo'))

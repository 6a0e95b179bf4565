# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The demo's script: times within the run, a retune the guard takes, refusals it must get."""

from __future__ import annotations

from corridor_pid.core.config import config_from_params, default_config
from corridor_pid.core.errors import DemoError
from corridor_pid.core.params import SPECS
from corridor_pid.demo.script import blackout_length, demo_script, MIN_DURATION
from corridor_pid.tuning.guard import guard_verdict
import pytest


def test_script_fits_the_run_in_order() -> None:
    """Retune, refusals, outage and its end come in that order, all inside the run."""
    script = demo_script(default_config(), 20.0)
    times = [0.0, *script.holds(), script.duration]
    assert times == sorted(times) and len(set(times)) == len(times)
    assert script.blackout_end - script.blackout_at == blackout_length(default_config())
    # The outage outlasts the watchdog timeout by far, and poses return before the end.
    assert script.blackout_end - script.blackout_at >= 5 * default_config().watchdog.timeout
    assert script.duration - script.blackout_end > 2.0


def test_too_short_a_run_is_refused_naming_the_option() -> None:
    """Below MIN_DURATION the script cannot fit: DemoError naming --duration."""
    with pytest.raises(DemoError, match='--duration'):
        demo_script(default_config(), MIN_DURATION - 0.5)


def test_retune_is_accepted_by_the_guard_and_the_unstable_gain_is_not() -> None:
    """The live retune passes the stability guard; the third unsafe change fails it."""
    config = default_config()
    script = demo_script(config, 20.0)
    raised = config_from_params({script.retune.name: script.retune.value}, base=config)
    assert script.retune.value > config.gains.kp
    assert guard_verdict(raised, config.speed.cruise).ok
    names = [change.name for change in script.unsafe]
    assert names[0] == 'steering.max_angle' and not SPECS['steering.max_angle'].live
    assert script.unsafe[1].value < 0.0
    unstable = config_from_params({'gains.kp': script.unsafe[2].value}, base=config)
    assert not guard_verdict(unstable, config.speed.cruise).ok


def test_without_the_guard_no_unstable_change_is_tried() -> None:
    """With tuning.guard off nothing would refuse a large gain, so the script leaves it out."""
    config = config_from_params({'tuning.guard': 'off'}, base=default_config())
    script = demo_script(config, 20.0)
    assert [change.name for change in script.unsafe] == ['steering.max_angle', 'gains.kd']

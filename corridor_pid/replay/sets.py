# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The live parameter changes a bag recorded (``/parameter_events``), for the replay to follow.

Every ROS 2 node publishes ``rcl_interfaces/msg/ParameterEvent`` on ``/parameter_events``
after each parameter set it accepted: its fully qualified name (``node``), the
``new_parameters`` it declared, the ``changed_parameters`` with their new values, and a
``stamp`` (its clock). A refused set publishes nothing. ``replay --follow-recorded-sets``
takes the ``changed_parameters`` of the controller node whose names are controller
parameters (:data:`corridor_pid.core.params.SPECS`; others, like ``use_sim_time``, are not
the controller's) and applies each event as one set at its time on the bag clock (the clock
the replay runs on), through the same validation path the node uses
(:func:`~corridor_pid.core.config.config_from_params` on top of the configuration in force,
then :meth:`~corridor_pid.core.controller.Controller.retune`).

The controller node: the one named, else the only node whose events change controller
parameters.
"""

from __future__ import annotations

from collections.abc import Sequence
import struct
from typing import Any, NamedTuple, TYPE_CHECKING

from corridor_pid.core.errors import ReplayError
from corridor_pid.core.params import SPECS
from corridor_pid.replay.bag import jazzy_typestore, RawStream

if TYPE_CHECKING:
    from rosbags.interfaces import Connection
    from rosbags.rosbag2 import Reader

__all__ = ['PARAMETER_EVENT_TYPE', 'RecordedSet', 'parameter_event_connections',
           'parameter_value', 'recorded_sets']

PARAMETER_EVENT_TYPE = 'rcl_interfaces/msg/ParameterEvent'
PARAMETER_EVENTS_TOPIC = '/parameter_events'


class RecordedSet(NamedTuple):
    """One accepted parameter set of the controller node, as recorded."""

    time_ns: int
    """Log time of the event (ns, bag clock)."""
    node: str
    """Fully qualified name of the node."""
    values: dict[str, object]
    """Controller parameter name -> new value (as the core validator takes it)."""


def parameter_value(value: Any) -> object:
    """Return an ``rcl_interfaces/ParameterValue`` as a Python value (arrays as lists).

    Double arrays become tuples of floats, as the node hands them to the validator; a
    ``NOT_SET`` value (type 0) becomes None.
    """
    kind = int(value.type)
    if kind == 1:
        return bool(value.bool_value)
    if kind == 2:
        return int(value.integer_value)
    if kind == 3:
        return float(value.double_value)
    if kind == 4:
        return str(value.string_value)
    if kind == 5:
        return [int(v) for v in value.byte_array_value]
    if kind == 6:
        return [bool(v) for v in value.bool_array_value]
    if kind == 7:
        return [int(v) for v in value.integer_array_value]
    if kind == 8:
        return tuple(float(v) for v in value.double_array_value)
    if kind == 9:
        return [str(v) for v in value.string_array_value]
    return None


def parameter_event_connections(reader: Reader) -> list[Connection]:
    """Return the connections of the bag's parameter events (``/parameter_events`` first).

    Raises:
        ReplayError: the bag holds no topic of type ``rcl_interfaces/msg/ParameterEvent``.

    """
    conns = [c for c in reader.connections if c.msgtype == PARAMETER_EVENT_TYPE]
    if not conns:
        raise ReplayError(
            f'--follow-recorded-sets: the bag holds no {PARAMETER_EVENTS_TOPIC} '
            f'({PARAMETER_EVENT_TYPE}); record that topic to follow live parameter changes')
    preferred = [c for c in conns if c.topic == PARAMETER_EVENTS_TOPIC]
    return preferred or [c for c in conns if c.topic == conns[0].topic]


def _events(stream: RawStream) -> list[tuple[int, str, dict[str, object]]]:
    """Return (time [ns], node, controller values changed) of every event, in bag order."""
    from rosbags.serde import SerdeError

    deserialize = jazzy_typestore().deserialize_cdr
    out = []
    for index, (ns, raw) in enumerate(zip(stream.times, stream.data)):
        try:
            msg: Any = deserialize(raw, stream.msgtype)
        except (SerdeError, ValueError, IndexError, OverflowError, struct.error) as err:
            reason = ' '.join(str(err).split()).rstrip('.')
            raise ReplayError(
                f'{stream.topic!r}: message {index} cannot be decoded ({reason})') from err
        values = {str(p.name): parameter_value(p.value) for p in msg.changed_parameters
                  if str(p.name) in SPECS}
        out.append((int(ns), str(msg.node), values))
    return out


def _fully_qualified(node: str) -> str:
    return node if node.startswith('/') else f'/{node}'


def recorded_sets(streams: Sequence[RawStream], node: str | None = None
                  ) -> tuple[str | None, list[RecordedSet]]:
    """Return the controller node and its recorded sets, in bag order.

    Args:
        streams: the parameter-event topics' messages.
        node: the controller node's name ('corridor_pid' or '/cart/corridor_pid'); None
            picks the only node whose events change controller parameters.

    Returns:
        (node, sets); node is None when no event changes a controller parameter.

    Raises:
        ReplayError: an undecodable event; ``node`` has no events in the bag; several
            nodes change controller parameters and none was named.

    """
    events = sorted((e for stream in streams for e in _events(stream)), key=lambda e: e[0])
    if node is not None:
        wanted = _fully_qualified(node)
        if not any(name == wanted for _, name, _ in events):
            seen = sorted({name for _, name, _ in events})
            raise ReplayError(
                f'--controller-node {node!r}: no parameter events of node {wanted!r} '
                f"in the bag (nodes: {', '.join(seen) or 'none'})")
    else:
        changing = sorted({name for _, name, values in events if values})
        if len(changing) > 1:
            raise ReplayError(
                '--follow-recorded-sets: several nodes change controller parameters '
                f"({', '.join(changing)}); name one, e.g. --controller-node "
                f'{changing[0]}')
        if not changing:
            return None, []
        wanted = changing[0]
    return wanted, [RecordedSet(ns, name, values) for ns, name, values in events
                    if name == wanted and values]

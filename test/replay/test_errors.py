# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Bags that cannot be replayed give one ReplayError naming the problem."""

from __future__ import annotations

from pathlib import Path
import shutil

from corridor_pid.core.errors import ReplayError
from corridor_pid.replay.record import pose_message, RecordedPose, write_run_bag
from corridor_pid.replay.report import replay_bag
import pytest
from replay_helpers import params
from replay_helpers import START_NS as BASE_NS
from rosbags.rosbag2 import StoragePlugin, Writer
from rosbags.typesys import get_typestore, Stores

CONFIG = params()
JAZZY = get_typestore(Stores.ROS2_JAZZY)


def _poses(count: int = 20, stamps: list[int] | None = None) -> list[RecordedPose]:
    stamps = stamps or [BASE_NS + k * 20_000_000 for k in range(count)]
    return [RecordedPose(BASE_NS + k * 20_000_000, s, 0.02 * k, 0.1, 0.0)
            for k, s in enumerate(stamps)]


def _one_line(err: pytest.ExceptionInfo[ReplayError]) -> str:
    text = str(err.value)
    assert '\n' not in text
    return text


def test_missing_bag(tmp_path: Path) -> None:
    """A path that does not exist."""
    with pytest.raises(ReplayError, match='no such bag') as err:
        replay_bag(tmp_path / 'nothing', CONFIG)
    _one_line(err)


def test_folder_that_is_not_a_bag(tmp_path: Path) -> None:
    """A folder without metadata.yaml."""
    with pytest.raises(ReplayError, match='not a rosbag2 bag'):
        replay_bag(tmp_path, CONFIG)


@pytest.mark.parametrize('storage', ['sqlite3', 'mcap'])
def test_corrupt_metadata(tmp_path: Path, storage: str) -> None:
    """metadata.yaml that is not YAML, or lacks keys."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses(), storage=storage)
    (bag / 'metadata.yaml').write_text('rosbag2_bagfile_information: {version: 9\n')
    with pytest.raises(ReplayError, match='cannot open the bag') as err:
        replay_bag(bag, CONFIG)
    _one_line(err)
    (bag / 'metadata.yaml').write_text('rosbag2_bagfile_information: {version: 9}\n')
    with pytest.raises(ReplayError, match='cannot open the bag'):
        replay_bag(bag, CONFIG)


@pytest.mark.parametrize('storage', ['sqlite3', 'mcap'])
def test_truncated_storage_file(tmp_path: Path, storage: str) -> None:
    """The storage file cut to half its size (a recording that died)."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses(400), storage=storage)
    data = next(p for p in bag.iterdir() if p.suffix in ('.db3', '.mcap'))
    raw = data.read_bytes()
    data.write_bytes(raw[:len(raw) // 2])
    with pytest.raises(ReplayError, match='cannot (open|read) the bag') as err:
        replay_bag(bag, CONFIG)
    _one_line(err)


@pytest.mark.parametrize('storage', ['sqlite3', 'mcap'])
def test_garbage_storage_file(tmp_path: Path, storage: str) -> None:
    """A storage file overwritten with garbage."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses(), storage=storage)
    data = next(p for p in bag.iterdir() if p.suffix in ('.db3', '.mcap'))
    data.write_bytes(b'\x13\x37' * 4096)
    with pytest.raises(ReplayError, match='cannot (open|read) the bag'):
        replay_bag(bag, CONFIG)


def test_missing_storage_file(tmp_path: Path) -> None:
    """metadata.yaml names a file that is gone."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses())
    next(bag.glob('*.db3')).unlink()
    with pytest.raises(ReplayError, match='cannot open the bag'):
        replay_bag(bag, CONFIG)


def test_missing_pose_topic(tmp_path: Path) -> None:
    """--pose-topic names a topic the bag does not have; the error lists the pose topics."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses())
    with pytest.raises(ReplayError, match=r"'/odom' is not in the bag; pose topics: /pose"):
        replay_bag(bag, CONFIG, pose_topic='odom')


def _writer_bag(path: Path, topics: dict[str, str], messages: list[tuple[str, int, bytes]]
                ) -> None:
    with Writer(path, version=9, storage_plugin=StoragePlugin.SQLITE3) as writer:
        conns = {t: writer.add_connection(t, m, typestore=JAZZY) for t, m in topics.items()}
        for topic, ns, data in messages:
            writer.write(conns[topic], ns, data)


def test_empty_pose_topic(tmp_path: Path) -> None:
    """The pose topic exists but holds no message."""
    bag = tmp_path / 'bag'
    _writer_bag(bag, {'/pose': 'geometry_msgs/msg/PoseStamped'}, [])
    with pytest.raises(ReplayError, match="'/pose' holds no messages"):
        replay_bag(bag, CONFIG)


def test_no_pose_topic_at_all(tmp_path: Path) -> None:
    """Only a Float64 topic: no topic of a pose type; the error lists what there is."""
    bag = tmp_path / 'bag'
    msg = bytes(JAZZY.serialize_cdr(JAZZY.types['std_msgs/msg/Float64'](data=1.0),
                                    'std_msgs/msg/Float64'))
    _writer_bag(bag, {'/steering_angle': 'std_msgs/msg/Float64'},
                [('/steering_angle', BASE_NS, msg)])
    with pytest.raises(ReplayError, match=r'no topic of a pose type .*/steering_angle'):
        replay_bag(bag, CONFIG)


def test_topic_of_an_unknown_type(tmp_path: Path) -> None:
    """--pose-topic on a topic whose type is not a pose."""
    bag = tmp_path / 'bag'
    msg = bytes(JAZZY.serialize_cdr(JAZZY.types['std_msgs/msg/Float64'](data=1.0),
                                    'std_msgs/msg/Float64'))
    _writer_bag(bag, {'/pose': 'std_msgs/msg/Float64'}, [('/pose', BASE_NS, msg)])
    with pytest.raises(ReplayError, match=r"'/pose' has type 'std_msgs/msg/Float64'"):
        replay_bag(bag, CONFIG)


def test_pose_type_mismatch(tmp_path: Path) -> None:
    """--pose-type odometry on a PoseStamped topic."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses())
    for topic in (None, '/pose'):
        with pytest.raises(ReplayError, match=r"'/pose' has type 'geometry_msgs/msg/PoseStamped'"
                                              r", not 'nav_msgs/msg/Odometry' \(--pose-type"):
            replay_bag(bag, CONFIG, pose_topic=topic, pose_kind='odometry')
    other = tmp_path / 'other'
    write_run_bag(other, _poses(), pose_topic='/localization')
    with pytest.raises(ReplayError, match='no topic of type nav_msgs/msg/Odometry'):
        replay_bag(other, CONFIG, pose_kind='odometry')


def test_several_pose_topics_need_a_choice(tmp_path: Path) -> None:
    """Two pose topics and none named /pose: the error asks for --pose-topic."""
    bag = tmp_path / 'bag'
    first = tmp_path / 'a'
    write_run_bag(first, _poses(), pose_topic='/a/pose')
    second = tmp_path / 'b'
    write_run_bag(second, _poses(), pose_topic='/b/odom', pose_kind='odometry')
    from rosbags.rosbag2 import Reader
    with Writer(bag, version=9) as writer:
        for source in (first, second):
            with Reader(source) as reader:
                for conn in reader.connections:
                    out = writer.add_connection(conn.topic, conn.msgtype, typestore=JAZZY)
                    for _, ns, data in reader.messages([conn]):
                        writer.write(out, ns, data)
    with pytest.raises(ReplayError, match='several pose topics .*/a/pose, /b/odom.*--pose-topic'):
        replay_bag(bag, CONFIG)
    assert replay_bag(bag, CONFIG, pose_topic='/b/odom').track.kind == 'odometry'
    assert replay_bag(bag, CONFIG, pose_kind='odometry').track.topic == '/b/odom'


def test_out_of_order_header_stamps(tmp_path: Path) -> None:
    """A header stamp older than the one before: error naming the message and the flag."""
    stamps = [BASE_NS + k * 20_000_000 for k in range(10)]
    stamps[6] = stamps[4]
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses(stamps=stamps))
    with pytest.raises(ReplayError, match=r'message 6 has header stamp .* not newer .*'
                                          r'--stamps receive') as err:
        replay_bag(bag, CONFIG)
    _one_line(err)
    # In arrival order the bag replays; the poses are the recorded ones.
    assert len(replay_bag(bag, CONFIG, stamps='receive').track) == 10


def test_zero_header_stamps(tmp_path: Path) -> None:
    """Poses recorded with empty stamps: error pointing to --stamps receive, which works."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses(stamps=[0] * 10))
    with pytest.raises(ReplayError, match='every header stamp is zero; replay with --stamps'):
        replay_bag(bag, CONFIG)
    assert replay_bag(bag, CONFIG, stamps='receive').run.computed.sum() == 10


def test_same_receive_times_with_receive_stamps(tmp_path: Path) -> None:
    """Two poses received at the same time cannot both be used with receive stamps."""
    poses = _poses(5)
    poses[3] = poses[3]._replace(receive_ns=poses[2].receive_ns)
    bag = tmp_path / 'bag'
    write_run_bag(bag, poses)
    with pytest.raises(ReplayError, match='messages 2 and 3 were received at the same time'):
        replay_bag(bag, CONFIG, stamps='receive')
    assert len(replay_bag(bag, CONFIG).track) == 5


def test_undecodable_pose_message(tmp_path: Path) -> None:
    """A pose message whose bytes are cut short: error naming the message."""
    bag = tmp_path / 'bag'
    good = bytes(JAZZY.serialize_cdr(pose_message(_poses(1)[0], 'pose_stamped'),
                                     'geometry_msgs/msg/PoseStamped'))
    _writer_bag(bag, {'/pose': 'geometry_msgs/msg/PoseStamped'},
                [('/pose', 1, good), ('/pose', 2, good[:30])])
    with pytest.raises(ReplayError, match=r"'/pose': message 1 cannot be decoded") as err:
        replay_bag(bag, CONFIG)
    _one_line(err)


def test_write_refuses_an_existing_output(tmp_path: Path) -> None:
    """--write onto an existing path: error, and the existing path is untouched."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses())
    out = tmp_path / 'out'
    out.mkdir()
    (out / 'keep').write_text('x')
    with pytest.raises(ReplayError, match='exists already'):
        replay_bag(bag, CONFIG, write=out)
    assert (out / 'keep').read_text() == 'x'


def test_failed_write_leaves_nothing(tmp_path: Path) -> None:
    """A write that fails half-way (source vanishes) leaves no partial bag behind."""
    bag = tmp_path / 'bag'
    write_run_bag(bag, _poses())
    from corridor_pid.replay.output import write_replayed_bag
    report = replay_bag(bag, CONFIG)
    shutil.rmtree(bag)
    with pytest.raises(ReplayError):
        write_replayed_bag(bag, tmp_path / 'out', report.run, report.track, 0.9)
    assert sorted(p.name for p in tmp_path.iterdir()) == []

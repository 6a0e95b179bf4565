# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Start the corridor_pid controller node with its params file (real ROS 2 installs).

    ros2 launch corridor_pid corridor_pid.launch.py
    ros2 launch corridor_pid corridor_pid.launch.py params_file:=/path/tuned.yaml
    ros2 launch corridor_pid corridor_pid.launch.py pose_topic:=/localization/pose

Launch arguments: ``params_file`` (default: the package's config/corridor_pid.yaml),
``pose_topic``, ``cmd_vel_topic``, ``namespace``, ``use_sim_time``. The node starts
disabled unless the params file sets ``start_enabled: true``; enable it with
``ros2 service call /corridor_pid/enable std_srvs/srv/SetBool "{data: true}"``.

Safety: test on a stand and at low speed first, keep a hardware emergency stop within
reach; the pose watchdog is not a safety-rated function.
"""

# ruff takes `launch` for this folder; it is the ROS launch package (third party).
from launch import LaunchDescription  # noqa: I001
from launch.actions import DeclareLaunchArgument
from launch.substitutions import LaunchConfiguration, PathJoinSubstitution
from launch_ros.actions import Node
from launch_ros.parameter_descriptions import ParameterValue
from launch_ros.substitutions import FindPackageShare


def generate_launch_description() -> LaunchDescription:
    """Return the launch description: launch arguments and the controller node."""
    default_params = PathJoinSubstitution(
        [FindPackageShare('corridor_pid'), 'config', 'corridor_pid.yaml'])
    return LaunchDescription([
        DeclareLaunchArgument(
            'params_file', default_value=default_params,
            description='ROS 2 params YAML of the controller (checked before the node starts)'),
        DeclareLaunchArgument(
            'pose_topic', default_value='pose',
            description='pose topic to follow (type set by the pose_type parameter)'),
        DeclareLaunchArgument(
            'cmd_vel_topic', default_value='cmd_vel',
            description='velocity command topic (TwistStamped unless cmd_vel_stamped: false)'),
        DeclareLaunchArgument(
            'namespace', default_value='', description='namespace of the node and its topics'),
        DeclareLaunchArgument(
            'use_sim_time', default_value='false',
            description='run on /clock (bag playback, simulators)'),
        Node(
            package='corridor_pid',
            executable='corridor_pid_node',
            name='corridor_pid',
            namespace=LaunchConfiguration('namespace'),
            output='screen',
            emulate_tty=True,
            parameters=[
                LaunchConfiguration('params_file'),
                {'use_sim_time': ParameterValue(
                    LaunchConfiguration('use_sim_time'), value_type=bool)},
            ],
            remappings=[
                ('pose', LaunchConfiguration('pose_topic')),
                ('cmd_vel', LaunchConfiguration('cmd_vel_topic')),
            ],
        ),
    ])

"""The plain per-robot loop the benchmarks compare against.

One pymunk Space per robot, one ``segment_query_first`` per ray, velocity control (the
body's velocity is set from the wheel commands before each physics step), and the same
controller called for one robot at a time. It is what a straightforward simulator of one
robot does, run N times; it computes the same observations as the batched engine
(range proximities and zone signals) so both sides do the same job.
"""

from __future__ import annotations

import math

import numpy as np
import pymunk

from neurodrome.control.protocol import Layout
from neurodrome.world import build_geometry


class PlainRobot:
    def __init__(self, world, controller) -> None:
        self.world = world
        self.controller = controller
        geometry = build_geometry(world)
        robot = world.robot
        self.space = pymunk.Space()
        self.space.collision_slop = 1e-4
        for x0, y0, x1, y1 in geometry.walls:
            seg = pymunk.Segment(self.space.static_body, (x0, y0), (x1, y1), 0.0)
            seg.filter = pymunk.ShapeFilter(categories=0b01)
            self.space.add(seg)
        self.body = pymunk.Body(robot.mass, pymunk.moment_for_circle(robot.mass, 0, robot.radius))
        shape = pymunk.Circle(self.body, robot.radius)
        shape.filter = pymunk.ShapeFilter(categories=0b10, mask=0b01)
        self.space.add(self.body, shape)
        self.filter = pymunk.ShapeFilter(mask=0b01)
        self.layout = Layout.of(world)
        self.rays = [math.radians(a) for a in robot.range_finders.angles_deg]
        self.reach = robot.radius + robot.range_finders.max_range
        self.markers = [(m.name, m.position, m.radius) for m in world.markers]
        self.reset()

    def reset(self) -> None:
        home = self.world.home
        self.body.position = home.position
        self.body.angle = math.radians(home.heading_deg)
        self.body.velocity = (0, 0)
        self.body.angular_velocity = 0
        self.controller.reset_lifetime(np.zeros(1, dtype=np.uint64))
        self.controller.reset_trial(np.ones(1, dtype=bool))

    def observe(self) -> np.ndarray:
        robot = self.world.robot
        x, y = self.body.position
        a = self.body.angle
        obs = np.zeros(self.layout.size)
        for k, ra in enumerate(self.rays):
            end = (x + self.reach * math.cos(a + ra), y + self.reach * math.sin(a + ra))
            hit = self.space.segment_query_first((x, y), end, 0.0, self.filter)
            if hit is not None:
                d = min(max(hit.alpha * self.reach - robot.radius, 0.0), robot.range_finders.max_range)
                obs[k] = 1.0 - d / robot.range_finders.max_range
        for k, name in enumerate(self.layout.channels[len(self.rays):], start=len(self.rays)):
            if name == "home":
                obs[k] = math.dist((x, y), self.world.home.position) <= self.world.home.radius
            elif name == "bias":
                obs[k] = 1.0
            else:
                for mname, pos, r in self.markers:
                    if mname == name:
                        obs[k] = math.dist((x, y), pos) <= r
        return obs

    def step(self) -> None:
        robot = self.world.robot
        wheels = np.asarray(self.controller.act(self.observe()[None, :]))[0]
        v_l, v_r = wheels[0] * robot.max_wheel_speed, wheels[1] * robot.max_wheel_speed
        v, omega = (v_l + v_r) / 2, (v_r - v_l) / robot.wheel_base
        dt = self.world.physics.time_step_s
        for _ in range(self.world.physics.substeps):
            a = self.body.angle
            self.body.velocity = (v * math.cos(a), v * math.sin(a))
            self.body.angular_velocity = omega
            self.space.step(dt)

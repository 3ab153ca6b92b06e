"""The plain per-robot loop the benchmarks compare against.

What a researcher writes by hand for one robot, run N times:

- :class:`PlainRobot`: one pymunk Space per robot holding the world's walls, one
  ``segment_query_first`` per ray, velocity control (the body's velocity is set from the
  wheel commands before each physics step). It computes the same observations as the
  batched engine (range proximities and zone signals) so both sides do the same job.
- :class:`PlainNetwork`: one robot's plastic network as small dense numpy matrices,
  parsed once from a network description dict (as ``network_bench.random_network``
  makes), stepped with two vector-matrix products and a masked Hebbian update. It does
  not use neurodrome's batched executor; :func:`check_against_executor` measures how
  far its wheel commands are from :class:`NetworkController`'s on the same observations.

Either a :class:`PlainNetwork` or any one-agent controller of the protocol (the scripted
courier) drives a :class:`PlainRobot`.
"""

from __future__ import annotations

import math

import numpy as np
import pymunk

from neurodrome.control.protocol import Layout
from neurodrome.world import build_geometry


class PlainNetwork:
    """One plastic network as dense (n, n) matrices indexed [source j, target i].

    Per step, in the order of ``neurodrome.control.network``'s docstring: inputs take
    their channels and bias neurons 1 (the presented values o'); ``a = o'_std @ W`` and
    ``m = o'_mod @ W`` with the weights before the step; ``o_i = tanh((a_i + bias_i)/2)``
    for hidden and output neurons; every plastic weight moves by
    ``tanh(m_i/2) * eta * (A o'_j o_i + B o'_j + C o_i + D)`` (the factor is 1 for a
    neuron no modulatory neuron reaches) and is clipped to the bounds; the wheel commands
    are the two output neurons' values. Only what the benchmark's random networks use is
    supported: tanh_half neurons and one network-wide rule and bounds.

    Implements the controller protocol for one agent (``n_agents = 1``).
    """

    n_agents = 1

    def __init__(self, data: dict, layout: Layout) -> None:
        neurons = data["neurons"]
        index = {nrn["id"]: k for k, nrn in enumerate(neurons)}
        n = len(neurons)
        self.w0 = np.zeros((n, n))
        self.plastic = np.zeros((n, n), dtype=bool)
        self.bias = np.zeros(n)
        self.standard = np.ones(n)  # 1 for standard neurons, 0 for modulatory ones
        inputs, channels, fed = [], [], np.zeros(n, dtype=bool)
        self.bias_neurons = []
        wheels = {}
        for k, nrn in enumerate(neurons):
            if nrn.get("activation", "tanh_half") != "tanh_half":
                raise NotImplementedError("the plain network supports tanh_half neurons only")
            self.bias[k] = nrn.get("bias", 0.0)
            if nrn.get("kind", "standard") == "modulatory":
                self.standard[k] = 0.0
            if nrn["role"] == "input":
                inputs.append(k)
                channels.append(layout.index(nrn["channel"]))
                fed[k] = True
            elif nrn["role"] == "bias":
                self.bias_neurons.append(k)
                fed[k] = True
            elif nrn["role"] == "output":
                wheels[nrn["wheel"]] = k
        for conn in data.get("connections", []):
            if "rule" in conn or "bounds" in conn:
                raise NotImplementedError("the plain network supports one network-wide rule and bounds only")
            j, i = index[conn["source"]], index[conn["target"]]
            self.w0[j, i] = conn["weight"]
            self.plastic[j, i] = bool(conn.get("plastic", False))
        self.modulatory = 1.0 - self.standard
        # M_i = tanh(m_i / 2) only where a modulatory neuron feeds i, else 1
        self.modulated = np.zeros(n, dtype=bool)
        for conn in data.get("connections", []):
            if self.modulatory[index[conn["source"]]]:
                self.modulated[index[conn["target"]]] = True
        rule = data.get("rule", {})
        self.eta = rule.get("learning_rate", 0.0)
        self.A, self.B = rule.get("correlation", 0.0), rule.get("presynaptic", 0.0)
        self.C, self.D = rule.get("postsynaptic", 0.0), rule.get("constant", 0.0)
        self.low, self.high = data.get("weight_bounds", (-10.0, 10.0))
        self.inputs = np.array(inputs, dtype=np.int64)
        self.channels = np.array(channels, dtype=np.int64)
        self.computed = np.flatnonzero(~fed)
        self.outputs = np.array([wheels["left"], wheels["right"]])
        self.o = np.zeros(n)
        self.w = self.w0.copy()
        self.reset_lifetime(None)

    def reset_lifetime(self, seeds=None) -> None:
        self.w = self.w0.copy()
        self.reset_trial(None)

    def reset_trial(self, mask=None) -> None:
        self.o[:] = 0.0
        self.o[self.bias_neurons] = 1.0

    def step(self, obs: np.ndarray) -> np.ndarray:
        """One control step: ``obs`` (C,) -> wheel commands (2,)."""
        o = self.o
        o[self.inputs] = obs[self.channels]  # bias neurons hold 1 throughout
        a = (o * self.standard) @ self.w
        m = (o * self.modulatory) @ self.w
        post = np.tanh((a + self.bias) / 2)  # new values, used for the computed neurons only
        gate = np.where(self.modulated, np.tanh(m / 2), 1.0)
        dw = gate * self.eta * (self.A * np.outer(o, post) + self.B * o[:, None] + self.C * post + self.D)
        self.w = np.where(self.plastic, np.clip(self.w + dw, self.low, self.high), self.w)
        o[self.computed] = post[self.computed]
        return np.clip(o[self.outputs], -1.0, 1.0)

    def act(self, obs: np.ndarray) -> np.ndarray:
        """The protocol's call for one agent: ``obs`` (1, C) -> (1, 2)."""
        return self.step(obs[0])[None, :]


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
        """One control step: observe, ask the controller, move."""
        self.move(np.asarray(self.controller.act(self.observe()[None, :]))[0])

    def move(self, wheels: np.ndarray) -> None:
        """One control period of physics with wheel commands (left, right) in [-1, 1]."""
        robot = self.world.robot
        v_l, v_r = wheels[0] * robot.max_wheel_speed, wheels[1] * robot.max_wheel_speed
        v, omega = (v_l + v_r) / 2, (v_r - v_l) / robot.wheel_base
        dt = self.world.physics.time_step_s
        for _ in range(self.world.physics.substeps):
            a = self.body.angle
            self.body.velocity = (v * math.cos(a), v * math.sin(a))
            self.body.angular_velocity = omega
            self.space.step(dt)


def check_against_executor(world, networks: list[dict], steps: int = 300, reset_every: int = 100) -> float:
    """Largest |difference| of wheel commands between :class:`PlainNetwork` and
    neurodrome's :class:`NetworkController`, each network alone, fed the same observations.

    Each network drives a :class:`PlainRobot` for ``steps`` control steps; every
    observation it sees goes to both implementations. Every ``reset_every`` steps both get
    a trial reset (activations cleared, weights kept), as at a trial boundary.
    """
    from neurodrome.control.network import NetworkController
    from neurodrome.control.spec import network_from_data

    layout = Layout.of(world)
    worst = 0.0
    for data in networks:
        plain = PlainNetwork(data, layout)
        robot = PlainRobot(world, plain)
        ref = NetworkController([network_from_data(data)], layout)
        ref.reset_lifetime(np.zeros(1, dtype=np.uint64))
        ref.reset_trial(np.ones(1, dtype=bool))
        for t in range(steps):
            if t and t % reset_every == 0:
                plain.reset_trial()
                ref.reset_trial(np.ones(1, dtype=bool))
            obs = robot.observe()
            mine = plain.step(obs)
            theirs = ref.act(obs[None, :])[0]
            worst = max(worst, float(np.max(np.abs(mine - theirs))))
            robot.move(mine)
    return worst

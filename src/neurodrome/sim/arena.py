"""One pymunk Space holding a whole batch of robots, each in its own tile of the plane.

Every agent gets its own copy of the walls in its own tile, so the broadphase never sees
hundreds of robots at one spot. Tile origins are laid out so that every coordinate of
every tile stays inside one floating-point binade [B, 2B): subtracting a tile origin is
then exact, rounding steps are the same in every tile, and an agent's path is
bit-identical whether it runs alone or in a batch of thousands. The binade and the tile
pitch depend only on the world, never on the batch size.

Robots are driven by force and torque towards the commanded wheel speeds (never by
overwriting velocity, which would defeat the contact solver), computed for the whole
batch at once and written with ``pymunk.batch``.
"""

from __future__ import annotations

import math

import numpy as np
import pymunk
import pymunk.batch as pb
from numba import njit

from ..world.geometry import Geometry
from ..world.spec import WorldSpec

#: Tiles per side of the grid; a Space holds at most GRID**2 agents.
GRID = 64
MAX_AGENTS = GRID * GRID

WALL_CATEGORY = 0b01
ROBOT_CATEGORY = 0b10
ROBOT_TYPE = 1
WALL_TYPE = 2

_READ = pb.BodyFields.POSITION | pb.BodyFields.ANGLE | pb.BodyFields.VELOCITY | pb.BodyFields.ANGULAR_VELOCITY
_WRITE = pb.BodyFields.FORCE | pb.BodyFields.TORQUE


def tile_layout(geometry: Geometry) -> tuple[float, float]:
    """(pitch, base): tile side in metres (a power of two) and the binade start B.

    World coordinates c satisfy |c| < pitch/2 - 1; tile k's origin is
    B + (col + 1/2) * pitch, so all coordinates lie in [B, B + GRID * pitch] within [B, 2B).
    """
    x0, y0, x1, y1 = geometry.bounds
    reach = max(abs(x0), abs(y0), abs(x1), abs(y1)) + 1.0
    pitch = 2.0 ** math.ceil(math.log2(2.0 * reach))
    base = 2.0 ** math.ceil(math.log2(GRID * pitch + pitch))
    return pitch, base


class Arena:
    """The physics of a batch of ``n`` robots in one world.

    Poses are exchanged in *local* (world-file) coordinates: arrays of shape (N, 2) for
    positions and (N,) for angles in radians.
    """

    def __init__(self, spec: WorldSpec, geometry: Geometry, n: int) -> None:
        if not 1 <= n <= MAX_AGENTS:
            raise ValueError(f"an arena holds 1 to {MAX_AGENTS} agents, not {n}")
        self.n = n
        self.spec = spec
        robot = spec.robot
        self.radius = robot.radius
        self.mass = robot.mass
        self.moment = pymunk.moment_for_circle(robot.mass, 0.0, robot.radius)
        self.dt = spec.physics.time_step_s
        self.substeps = spec.physics.substeps
        self.pitch, self.base = tile_layout(geometry)
        cols = np.arange(n) % GRID
        rows = np.arange(n) // GRID
        self.origins = np.stack(
            [self.base + (cols + 0.5) * self.pitch, self.base + (rows + 0.5) * self.pitch], axis=1
        )

        space = pymunk.Space()
        space.gravity = (0.0, 0.0)
        space.damping = 1.0
        # pymunk's defaults assume pixels; in metres a 0.1 slop would let robots sink 10 cm.
        space.collision_slop = 1e-4
        space.iterations = 10
        self.space = space

        walls = geometry.walls
        wall_filter = pymunk.ShapeFilter(categories=WALL_CATEGORY, mask=ROBOT_CATEGORY)
        robot_filter = pymunk.ShapeFilter(categories=ROBOT_CATEGORY, mask=WALL_CATEGORY)
        static = space.static_body
        wall_shapes = []
        for k in range(n):
            ox, oy = self.origins[k]
            for x0, y0, x1, y1 in walls:
                seg = pymunk.Segment(static, (ox + x0, oy + y0), (ox + x1, oy + y1), 0.0)
                seg.filter = wall_filter
                seg.collision_type = WALL_TYPE
                seg.friction = 0.3
                seg.elasticity = 0.0
                wall_shapes.append(seg)
        self._robot_filter = robot_filter
        self.bodies: list[pymunk.Body] = []
        self.shapes: list[pymunk.Circle] = []
        self._shape_agent: dict[int, int] = {}
        for k in range(n):
            self._new_robot(k, tuple(self.origins[k]))
        self._body_ids = np.array([b.id for b in self.bodies], dtype=np.uintp)
        space.add(*wall_shapes, *[x for k in range(n) for x in (self.bodies[k], self.shapes[k])])
        self.touching = np.zeros(n, dtype=np.int64)
        self.contact_begun = np.zeros(n, dtype=bool)
        space.on_collision(ROBOT_TYPE, WALL_TYPE, begin=self._begin, separate=self._separate)

        self._buf = pb.Buffer()
        self._wbuf = pb.Buffer()
        self.live = np.ones(n, dtype=bool)
        self.state = np.zeros((n, 6))  # x, y, angle, vx, vy, w in global coordinates
        self._remap()
        self.read()

    def _new_robot(self, k: int, position: tuple[float, float]) -> None:
        """Agent k's body and shape (not yet added to the space)."""
        body = pymunk.Body(self.mass, self.moment)
        body.position = position
        circle = pymunk.Circle(body, self.radius)
        circle.filter = self._robot_filter
        circle.collision_type = ROBOT_TYPE
        circle.friction = 0.3
        circle.elasticity = 0.0
        self.bodies.append(body)
        self.shapes.append(circle)
        self._shape_agent[id(circle)] = k

    def _remap(self) -> None:
        """Map live agents to their rows in pymunk's body order (found by BODY_ID); the
        write buffer covers every row, the static body's included."""
        self._buf.clear()
        pb.get_space_bodies(self.space, pb.BodyFields.BODY_ID, self._buf)
        ids = np.frombuffer(self._buf.int_buf(), dtype=np.uintp).copy()
        self._buf.clear()
        self._live_idx = np.flatnonzero(self.live)
        order = np.argsort(ids, kind="stable")
        wanted = self._body_ids[self._live_idx]
        self._rows = order[np.searchsorted(ids[order], wanted)].astype(np.intp)
        self._nrows = len(ids)
        self._write = np.zeros((self._nrows, 3), dtype=np.float64)
        self._wbuf.set_float_buf(self._write.reshape(-1))

    def retire(self, agents: np.ndarray) -> None:
        """Take finished agents out of the physics: their bodies leave the space and their
        state stays frozen. The others are unaffected (they never interact)."""
        agents = [k for k in np.asarray(agents).tolist() if self.live[k]]
        if not agents:
            return
        for k in agents:
            self.space.remove(self.bodies[k], self.shapes[k])
            self.live[k] = False
            self.touching[k] = 0
        self._remap()

    def revive(self) -> None:
        """Bring every retired agent back into the physics (for a fresh evaluation)."""
        dead = np.flatnonzero(~self.live).tolist()
        if not dead:
            return
        for k in dead:  # a retired body may still hold a contact's position correction
            pymunk.Body.update_position(self.bodies[k], 0.0)
        self.space.add(*[x for k in dead for x in (self.bodies[k], self.shapes[k])])
        self.live[:] = True
        self._remap()

    # -- contacts (called by pymunk only when a contact begins or ends) ---------------
    def _agent_of(self, arbiter: pymunk.Arbiter) -> int:
        a, b = arbiter.shapes
        return self._shape_agent.get(id(a), self._shape_agent.get(id(b), -1))

    def _begin(self, arbiter: pymunk.Arbiter, space: pymunk.Space, data) -> None:
        k = self._agent_of(arbiter)
        self.touching[k] += 1
        self.contact_begun[k] = True

    def _separate(self, arbiter: pymunk.Arbiter, space: pymunk.Space, data) -> None:
        k = self._agent_of(arbiter)
        self.touching[k] = max(0, self.touching[k] - 1)

    # -- bulk state ---------------------------------------------------------------
    def read(self) -> np.ndarray:
        """Refresh ``state`` (N, 6) from the space in one bulk read."""
        self._buf.clear()
        pb.get_space_bodies(self.space, _READ, self._buf)
        raw = np.frombuffer(self._buf.float_buf(), dtype=np.float64).reshape(self._nrows, 6)
        self.state[self._live_idx] = raw[self._rows]
        return self.state

    @property
    def positions(self) -> np.ndarray:
        """(N, 2) positions in world-file coordinates (exact: same binade as the origin)."""
        return self.state[:, 0:2] - self.origins

    @property
    def angles(self) -> np.ndarray:
        return self.state[:, 2]

    def step(self, wheels: np.ndarray, max_speed: float, wheel_base: float) -> None:
        """Advance one control period with wheel commands ``wheels`` (N, 2) in [-1, 1].

        Each substep sets force and torque that bring the body to the exact-arc velocity of
        the commanded wheels over the following step (see :func:`_drive_kernel`).
        """
        live = self._live_idx
        if not len(live):
            return
        v_l = wheels[live, 0] * max_speed
        v_r = wheels[live, 1] * max_speed
        v = 0.5 * (v_l + v_r)
        omega = (v_r - v_l) / wheel_base
        for _ in range(self.substeps):
            _drive_kernel(self.state[live], self._rows, v, omega, self.dt, self.mass, self.moment, self._write)
            pb.set_space_bodies(self.space, _WRITE, self._wbuf)
            self.space.step(self.dt)
            self.read()

    def place(self, agents: np.ndarray, positions: np.ndarray, angles: np.ndarray) -> None:
        """Put the given live agents at rest at local ``positions`` (K, 2), ``angles`` (K,),
        in one bulk write.

        pymunk keeps a contact's position correction (a bias velocity applied in the next
        step) inside the body, where no setter reaches it; it would nudge a robot that
        touched a wall off its start. pymunk's own position update with a zero time step
        moves nothing and clears that correction.
        """
        agents = np.asarray(agents, dtype=np.intp)
        for k in agents[(self.touching[agents] > 0) | self.contact_begun[agents]].tolist():
            pymunk.Body.update_position(self.bodies[k], 0.0)
        self._buf.clear()
        pb.get_space_bodies(self.space, _READ, self._buf)
        raw = np.frombuffer(self._buf.float_buf(), dtype=np.float64).reshape(self._nrows, 6).copy()
        slot = np.full(len(self.live), -1, dtype=np.intp)
        slot[self._live_idx] = self._rows
        rows = slot[agents]
        raw[rows, 0:2] = self.origins[agents] + positions
        raw[rows, 2] = angles
        raw[rows, 3:6] = 0.0
        buffer = pb.Buffer()
        buffer.set_float_buf(raw.reshape(-1))
        pb.set_space_bodies(self.space, _READ, buffer)
        self.read()


@njit(cache=True, nogil=True)
def _drive_kernel(state, rows, v, omega, dt, mass, moment, out):  # pragma: no cover - compiled
    """Force and torque that take each body to the commanded motion over the next step.

    pymunk integrates positions with the velocity left by the previous step, then
    integrates velocities with the forces, then solves contacts. So the velocity set now
    moves the body during the *next* step, starting from heading angle + w dt. Over that
    step the exact arc of a differential drive (Dudek & Jenkin; Siegwart et al., ch. 3)
    is a chord of length v dt sinc(omega dt / 2) at heading + omega dt / 2; aiming the
    velocity along that chord makes the path exact at every step in free space, while
    contacts still act because the solver corrects the velocity after the force.

    Compiled (numba): one pass over the agents, written straight into the bulk-write rows.
    """
    for k in range(state.shape[0]):
        half = 0.5 * omega[k] * dt
        sinc = math.sin(half) / half if abs(half) > 1e-12 else 1.0
        heading = state[k, 2] + state[k, 5] * dt + half
        speed = v[k] * sinc
        r = rows[k]
        out[r, 0] = mass * (speed * math.cos(heading) - state[k, 3]) / dt
        out[r, 1] = mass * (speed * math.sin(heading) - state[k, 4]) / dt
        out[r, 2] = moment * (omega[k] - state[k, 5]) / dt

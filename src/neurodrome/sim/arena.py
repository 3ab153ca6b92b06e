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

Wall contacts are found without pymunk callbacks: after every physics step a compiled
kernel repeats pymunk's own circle-to-segment test (Chipmunk's ``CircleToSegment``: the
closest point of the segment, then squared distance below the squared radius) on the walls
near each robot, in the same global coordinates and the same floating-point operations, and
keeps each robot's set of touching walls. A contact *begins* when a wall enters that set,
which is when pymunk calls a ``begin`` handler (once per shape pair, on the first step the
pair collides after a step it did not). ``tests/test_sim_contacts.py`` checks the kernel
against pymunk's handlers step by step.
"""

from __future__ import annotations

import math

import numpy as np
import pymunk
import pymunk.batch as pb
from numba import njit

from ..world.geometry import Geometry
from ..world.spec import WorldSpec
from .sensors import WallGrid

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
        for k in range(n):
            self._new_robot(k, tuple(self.origins[k]))
        self._body_ids = np.array([b.id for b in self.bodies], dtype=np.uintp)
        space.add(*wall_shapes, *[x for k in range(n) for x in (self.bodies[k], self.shapes[k])])
        self.contact_begun = np.zeros(n, dtype=np.bool_)
        self._touch = np.zeros((n, MAX_TOUCHING), dtype=np.int64)  # walls each robot touches
        self._n_touch = np.zeros(n, dtype=np.int64)
        self._walls = np.ascontiguousarray(walls, dtype=np.float64).reshape(-1, 4)
        # each cell lists every wall within one radius (and a margin) of it
        self._contact_grid = WallGrid(self._walls, self.radius, cell=max(4.0 * self.radius, 0.05),
                                      grow=self.radius + 1e-6)

        self._buf = pb.Buffer()
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

    def _remap(self) -> None:
        """Map live agents to their rows in pymunk's body order (found by BODY_ID) and
        set up the bulk buffers: the read buffer holds every row (the static body's
        included), the write buffer covers every row as a set-buffer must."""
        self._buf.clear()
        pb.get_space_bodies(self.space, pb.BodyFields.BODY_ID, self._buf)
        ids = np.frombuffer(self._buf.int_buf(), dtype=np.uintp).copy()
        self._buf.clear()
        self._live_idx = np.flatnonzero(self.live).astype(np.int64)
        order = np.argsort(ids, kind="stable")
        wanted = self._body_ids[self._live_idx]
        self._rows = order[np.searchsorted(ids[order], wanted)].astype(np.int64)
        self._nrows = len(ids)
        self._io = _BodyIO(self.space, self._nrows)
        self._write = self._io.write
        self._io.get()

    def retire(self, agents: np.ndarray) -> None:
        """Take finished agents out of the physics: their bodies leave the space and their
        state stays frozen. The others are unaffected (they never interact)."""
        agents = [k for k in np.asarray(agents).tolist() if self.live[k]]
        if not agents:
            return
        for k in agents:
            self.space.remove(self.bodies[k], self.shapes[k])
            self.live[k] = False
            self._n_touch[k] = 0
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

    @property
    def touching(self) -> np.ndarray:
        """(N,) how many walls each robot touches after the last physics step."""
        return self._n_touch.copy()

    # -- bulk state ---------------------------------------------------------------
    def read(self) -> np.ndarray:
        """Refresh ``state`` (N, 6) from the space in one bulk read."""
        self._io.get()
        self.state[self._live_idx] = self._io.read[self._rows]
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
        the commanded wheels over the following step (see :func:`_drive_kernel`), steps
        the space, reads the bodies back and updates the wall contacts.
        """
        live = self._live_idx
        if not len(live):
            return
        io, g, dt = self._io, self._contact_grid, self.dt
        wheels = np.ascontiguousarray(wheels, dtype=np.float64)
        for _ in range(self.substeps):
            _drive_kernel(self.state, live, self._rows, wheels, max_speed, wheel_base, dt, self.mass, self.moment,
                          self._write)
            io.set()
            io.step(dt)
            io.get()
            _contact_kernel(io.read, self._rows, self.state, self.origins, live, self._walls, self.radius, g.x0,
                            g.y0, g.cell, g.nx, g.ny, g.cell_start, g.cell_walls, self._touch, self._n_touch,
                            self.contact_begun)

    def place(self, agents: np.ndarray, positions: np.ndarray, angles: np.ndarray) -> None:
        """Put the given live agents at rest at local ``positions`` (K, 2), ``angles`` (K,),
        in one bulk write.

        pymunk keeps a contact's position correction (a bias velocity applied in the next
        step) inside the body, where no setter reaches it; it would nudge a robot that
        touched a wall off its start. pymunk's own position update with a zero time step
        moves nothing and clears that correction.
        """
        agents = np.asarray(agents, dtype=np.intp)
        if not len(agents):
            return
        for k in agents[(self._n_touch[agents] > 0) | self.contact_begun[agents]].tolist():
            pymunk.Body.update_position(self.bodies[k], 0.0)
        slot = np.full(len(self.live), -1, dtype=np.intp)
        slot[self._live_idx] = self._rows
        rows = slot[agents]
        raw = self._io.read  # every row as last read; nothing has moved since
        raw[rows, 0:2] = self.origins[agents] + positions
        raw[rows, 2] = angles
        raw[rows, 3:6] = 0.0
        self._io.set_all()
        self.state[agents] = raw[rows]


class _BodyIO:
    """Bulk body reads and writes of one Space through ``pymunk.batch``'s own C
    iterators, with buffers and call records made once (the wrapper functions build them
    on every call, which costs more than the copy at small batch sizes).

    ``read`` (rows, 6) holds position, angle, velocity and angular velocity of every body
    in pymunk's order after :meth:`get`; ``write`` (rows, 3) the force and torque that
    :meth:`set` applies. :meth:`set_all` writes ``read`` back (poses and velocities).
    """

    def __init__(self, space: pymunk.Space, rows: int) -> None:
        ffi, lib = pb.ffi, pb.lib
        self._space = space
        self._ptr = space._space
        self._lib = lib
        self._get_fn = ffi.addressof(lib, "pmSpaceBodyGetIteratorFuncBatched")
        self._set_fn = ffi.addressof(lib, "pmSpaceBodySetIteratorFuncBatched")
        # one spare slot: the C array grows (and moves) when a push fills it
        self._rarr = lib.pmFloatArrayNew(rows * 6 + 1)
        self._first = self._rarr.arr
        self.read = np.frombuffer(ffi.buffer(self._rarr.arr, rows * 6 * 8), dtype=np.float64).reshape(rows, 6)
        self._rdata = self._record(ffi, _READ, self._rarr)
        self.write = np.zeros((rows, 3), dtype=np.float64)
        self._warr = ffi.new("pmFloatArray *")
        self._wmem = ffi.from_buffer("cpFloat[]", self.write)
        self._warr.arr, self._warr.max, self._warr.num = self._wmem, rows * 3, 0
        self._wdata = self._record(ffi, _WRITE, self._warr)
        self._back = ffi.new("pmFloatArray *")
        self._bmem = ffi.from_buffer("cpFloat[]", self.read)
        self._back.arr, self._back.max, self._back.num = self._bmem, rows * 6, 0
        self._bdata = self._record(ffi, _READ, self._back)

    @staticmethod
    def _record(ffi, fields, array):
        data = ffi.new("pmBatchedData *")
        data.fields = fields.value
        data.floatArray = array
        data.intArray = pb.lib.pmIntArrayNew(0)
        return data

    def get(self) -> None:
        self._rarr.num = 0
        self._lib.cpSpaceEachBody(self._ptr, self._get_fn, self._rdata)
        if self._rarr.arr != self._first:  # pragma: no cover - guarded by the spare slot
            raise RuntimeError("pymunk moved the bulk read buffer")

    def set(self) -> None:
        self._warr.num = 0
        self._lib.cpSpaceEachBody(self._ptr, self._set_fn, self._wdata)

    def set_all(self) -> None:
        self._back.num = 0
        self._lib.cpSpaceEachBody(self._ptr, self._set_fn, self._bdata)

    def step(self, dt: float) -> None:
        """``cpSpaceStep`` without pymunk's Python bookkeeping, which only serves
        callbacks and objects added or removed during a step (the arena uses neither)."""
        self._lib.cpSpaceStep(self._ptr, dt)


@njit(cache=True, nogil=True)
def _drive_kernel(state, live, rows, wheels, max_speed, wheel_base, dt, mass, moment, out):  # pragma: no cover
    """Force and torque that take each live body to the commanded motion over the next step.

    Wheel speeds v_l, v_r are the commands times ``max_speed``; v = (v_l + v_r) / 2 and
    omega = (v_r - v_l) / wheel_base. pymunk integrates positions with the velocity left
    by the previous step, then integrates velocities with the forces, then solves
    contacts. So the velocity set now moves the body during the *next* step, starting from
    heading angle + w dt. Over that step the exact arc of a differential drive (Dudek &
    Jenkin; Siegwart et al., ch. 3) is a chord of length v dt sinc(omega dt / 2) at
    heading + omega dt / 2; aiming the velocity along that chord makes the path exact at
    every step in free space, while contacts still act because the solver corrects the
    velocity after the force.

    Compiled (numba): one pass over the live agents, written straight into the bulk-write
    rows.
    """
    for q in range(live.shape[0]):
        k = live[q]
        v_l = wheels[k, 0] * max_speed
        v_r = wheels[k, 1] * max_speed
        v = 0.5 * (v_l + v_r)
        omega = (v_r - v_l) / wheel_base
        half = 0.5 * omega * dt
        sinc = math.sin(half) / half if abs(half) > 1e-12 else 1.0
        heading = state[k, 2] + state[k, 5] * dt + half
        speed = v * sinc
        r = rows[q]
        out[r, 0] = mass * (speed * math.cos(heading) - state[k, 3]) / dt
        out[r, 1] = mass * (speed * math.sin(heading) - state[k, 4]) / dt
        out[r, 2] = moment * (omega - state[k, 5]) / dt


#: Most walls one robot can touch at once that the contact kernel tracks; a robot touching
#: more (only in mazes of tiny segments) counts every extra wall as a new contact.
MAX_TOUCHING = 32


@njit(cache=True, nogil=True)
def _contact_kernel(raw, rows, state, origins, live_idx, walls, radius, gx0, gy0, gcell, gnx, gny, cell_start,
                    cell_walls, touch, n_touch, begun):  # pragma: no cover - compiled
    """Copy each live robot's row of the bulk read into ``state``, then pymunk's
    circle-to-segment contact test for it and the walls near it.

    The arithmetic is Chipmunk's ``CircleToSegment`` on the same numbers pymunk holds: the
    segment ends as built (tile origin + local end), the body position as read; the
    segment radius is 0 and segments have no neighbour tangents, so a contact exists
    exactly when the squared distance from the centre to the closest point is below r^2.
    """
    mindist = radius + 0.0
    r2 = mindist * mindist
    cap = touch.shape[1]
    scratch = np.empty(cap, dtype=np.int64)
    for q in range(live_idx.shape[0]):
        k = live_idx[q]
        for f in range(6):
            state[k, f] = raw[rows[q], f]
        px = state[k, 0]
        py = state[k, 1]
        ox = origins[k, 0]
        oy = origins[k, 1]
        ci = int(math.floor(((px - ox) - gx0) / gcell))
        cj = int(math.floor(((py - oy) - gy0) / gcell))
        ci = min(max(ci, 0), gnx - 1)
        cj = min(max(cj, 0), gny - 1)
        c = cj * gnx + ci
        old = n_touch[k]
        count = 0
        for m in range(cell_start[c], cell_start[c + 1]):
            w = cell_walls[m]
            ax = ox + walls[w, 0]
            ay = oy + walls[w, 1]
            bx = ox + walls[w, 2]
            by = oy + walls[w, 3]
            dx = bx - ax
            dy = by - ay
            t = (dx * (px - ax) + dy * (py - ay)) / (dx * dx + dy * dy)
            t = t if t < 1.0 else 1.0  # cpfclamp01: cpfmax(0, cpfmin(t, 1))
            t = 0.0 if 0.0 > t else t
            nx = px - (ax + dx * t)
            ny = py - (ay + dy * t)
            if nx * nx + ny * ny < r2:
                seen = False
                for e in range(old):
                    if touch[k, e] == w:
                        seen = True
                        break
                if not seen:
                    begun[k] = True
                if count < cap:
                    scratch[count] = w
                    count += 1
                else:
                    begun[k] = True  # past the tracked capacity: counted as a new contact
        for e in range(count):
            touch[k, e] = scratch[e]
        n_touch[k] = count

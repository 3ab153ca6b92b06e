"""Batched execution of plastic networks: compile specs to padded arrays, step them all.

Update order of one control step (``NetworkController.act``), for every agent at once
--------------------------------------------------------------------------------------
Each agent keeps a vector o of neuron values (after a trial or lifetime reset: 1 for bias
neurons, 0 for all others) and its current weights w.

1. **Fed neurons take their values.** Every input neuron is set to its observation
   channel, ``o_j = obs[channel]``; every bias neuron to 1. Hidden and output neurons keep
   the values of the previous step. Call this vector o' (the *presented* values).
2. **Activations, synchronously.** For every hidden and output neuron i::

       a_i = sum over connections j -> i from a standard neuron    of w_ji * o'_j
       m_i = sum over connections j -> i from a modulatory neuron  of w_ji * o'_j

   with the weights as they were before this step. So a sensor reaches a neuron it feeds
   in the same step, and every connection leaving a hidden or output neuron (recurrent or
   not) carries one control step of delay. Sums run over the source index j in the
   neurons' file order, left to right (see "Bit-identity" below).
3. **Outputs.** ``o_i = f(a_i + bias_i)`` with f: ``tanh_half`` tanh(x/2);
   ``logistic`` 1/(1+e^-x), computed as (1 + tanh(x/2))/2, the same function without
   overflow; ``linear`` x. Both kinds of neuron compute their output this way.
4. **Plasticity.** Every plastic connection j -> i changes by::

       dw_ji = M_i * eta * (A * o'_j * o_i + B * o'_j + C * o_i + D)
       M_i   = tanh(m_i / 2) if i has an incoming connection from a modulatory neuron, else 1

   (Soltoggio et al. 2008, ALife XI; M_i = 1 is the plain Hebbian case), then is clipped
   to the connection's bounds. The presynaptic value is o'_j, the value that travelled
   along the connection this step and produced o_i; the postsynaptic value is the new
   o_i. So the rule correlates cause and effect across the connection's own delay, and
   needs no second pass over the network. The new weights are used from the next step
   on. Fixed connections never change. The executor evaluates the rule in the
   algebraically equal form ``M_i * ((eta A o_i + eta B) o'_j + (eta C o_i + eta D))``
   (fewer array passes); the per-neuron reference in the tests uses the form above and
   agrees to 1e-9.
5. **Wheel commands.** ``left, right`` are the values of the two output neurons mapped to
   [-1, 1]: tanh_half as is; logistic 2*o - 1 (0.5 means stop); linear clipped to
   [-1, 1]. If any computed neuron value or plastic weight of an agent is non-finite after
   the step (a linear neuron overflowed, say), both its commands are NaN: ``act`` never
   raises on a non-finite value, the simulator stops that agent, and
   :meth:`NetworkController.faulted` reports which agents hold a non-finite value. After a
   fault an agent's values are not specified further.

``reset_trial(mask)`` zeroes o and m of the masked agents and keeps their weights (what
was learned carries over to the next trial); ``reset_lifetime(seeds)`` restores every
agent's initial weights and zeroes o and m. Networks are deterministic: seeds are unused.

Execution and bit-identity
--------------------------
The step runs as two compiled kernels (numba) with one numpy call between them. The first
sets the inputs and forms, per agent and per computed neuron, the two sums of step 2 over
that neuron's incoming connections in ascending source order; the second applies the
activations, the plastic rule and the writes of steps 3 to 5. Between them, ``numpy.tanh``
maps the whole batch's x/2 and m/2 in one call: numpy's vectorised tanh differs from the C
library's in the last bit for about a third of arguments, and it is the function the
shipped champions were evolved with, so it is kept. numpy's tanh gives each element the
same bits whatever the array's length or the element's place in it.

Each agent's networks live in flat per-agent segments (CSR-like offsets), so an agent's
arithmetic never depends on the batch around it: results are bit-identical alone or in any
batch. A sum starts from +0.0 and adds only the agent's real connections; the padded
executor this replaces added exact zeros for absent ones, which changes no bit (x + 0.0 is
x, and a sum that starts at +0.0 never becomes -0.0), so the two agree bit for bit.
Agents that the simulator marks inactive (finished) are skipped, so a batch's cost falls
with its live agents.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from numba import njit

from .protocol import ControllerFactory, Layout
from .spec import ACTIVATIONS, WHEELS, NetworkSpec, check_against_layout

#: Activation codes in compiled arrays.
TANH_HALF, LOGISTIC, LINEAR = (ACTIVATIONS.index(a) for a in ("tanh_half", "logistic", "linear"))


@dataclass
class CompiledNetworks:
    """Networks of a batch as padded dense arrays; N agents, n = the largest network.

    Weight-like arrays are indexed ``[agent, source j, target i]``. Padded neurons and
    connections are zero everywhere (masks false).
    """

    neuron_ids: list[list[str]]  # per agent, in index order
    w_standard: np.ndarray  # (N, n, n) initial weights of connections from standard neurons
    w_modulatory: np.ndarray  # (N, n, n) initial weights of connections from modulatory neurons
    connected: np.ndarray  # (N, n, n) bool, a connection exists
    plastic: np.ndarray  # (N, n, n) bool
    rule: np.ndarray  # (5, N, n, n) eta, A, B, C, D of plastic connections, else 0
    bounds: np.ndarray  # (2, N, n, n) low, high of plastic connections, else 0
    bias: np.ndarray  # (N, n)
    activation: np.ndarray  # (N, n) int8 activation codes (index into spec.ACTIVATIONS)
    modulatory: np.ndarray  # (N, n) bool, neuron is of kind modulatory
    input_channel: np.ndarray  # (N, n) int64 observation index of input neurons, -1 otherwise
    is_bias: np.ndarray  # (N, n) bool
    is_real: np.ndarray  # (N, n) bool, not padding
    outputs: np.ndarray  # (N, 2) int64 index of the left and right output neurons

    @property
    def n_agents(self) -> int:
        return self.bias.shape[0]

    @property
    def size(self) -> int:
        return self.bias.shape[1]


def compile_networks(specs: Sequence[NetworkSpec], layout: Layout) -> CompiledNetworks:
    """Compile ``specs`` (one per agent) for a world's observation ``layout``.

    Raises :class:`~neurodrome.errors.ControllerFileError` if an input reads a channel the
    layout lacks.
    """
    if not specs:
        raise ValueError("compile_networks needs at least one network")
    for spec in specs:
        check_against_layout(spec, layout)
    N, n = len(specs), max(len(s.neurons) for s in specs)
    zeros = lambda *shape, dtype=np.float64: np.zeros(shape, dtype=dtype)  # noqa: E731
    c = CompiledNetworks(
        neuron_ids=[s.neuron_ids() for s in specs],
        w_standard=zeros(N, n, n), w_modulatory=zeros(N, n, n),
        connected=zeros(N, n, n, dtype=bool), plastic=zeros(N, n, n, dtype=bool),
        rule=zeros(5, N, n, n), bounds=zeros(2, N, n, n),
        bias=zeros(N, n), activation=zeros(N, n, dtype=np.int8), modulatory=zeros(N, n, dtype=bool),
        input_channel=np.full((N, n), -1, dtype=np.int64), is_bias=zeros(N, n, dtype=bool),
        is_real=zeros(N, n, dtype=bool), outputs=zeros(N, 2, dtype=np.int64),
    )
    for b, spec in enumerate(specs):
        index = {nid: k for k, nid in enumerate(c.neuron_ids[b])}
        for k, neuron in enumerate(spec.neurons):
            c.is_real[b, k] = True
            c.bias[b, k] = neuron.bias
            c.activation[b, k] = ACTIVATIONS.index(neuron.activation)
            c.modulatory[b, k] = neuron.kind == "modulatory"
            if neuron.role == "input":
                c.input_channel[b, k] = layout.index(neuron.channel)  # type: ignore[arg-type]
            elif neuron.role == "bias":
                c.is_bias[b, k] = True
            elif neuron.role == "output":
                c.outputs[b, WHEELS.index(neuron.wheel)] = k  # type: ignore[arg-type]
        for conn, rule in zip(spec.connections, spec.rules()):
            j, i = index[conn.source], index[conn.target]
            c.connected[b, j, i] = True
            (c.w_modulatory if c.modulatory[b, j] else c.w_standard)[b, j, i] = conn.weight
            if conn.plastic:
                c.plastic[b, j, i] = True
                c.rule[:, b, j, i] = rule
                c.bounds[:, b, j, i] = spec.bounds_of(conn)
    return c


class NetworkController:
    """A batch of plastic networks implementing the controller protocol.

    One agent per spec; networks may differ in size and topology. See the module
    docstring for the exact update order.
    """

    def __init__(self, specs: Sequence[NetworkSpec], layout: Layout) -> None:
        self.specs = list(specs)
        self.layout = layout
        self.compiled = c = compile_networks(self.specs, layout)
        N, n = c.n_agents, c.size
        self.n_agents = N
        self.neuron_ids = c.neuron_ids
        self._n = n
        fed = (c.input_channel >= 0) | c.is_bias
        computed = c.is_real & ~fed
        in_off, in_neuron, in_chan = [0], [], []
        tgt_off, tgt_agent, tgt_neuron, tgt_bias, tgt_act, tgt_mod = [0], [], [], [], [], []
        conn_off, conn_src, conn_kind, conn_w0 = [0], [], [], []
        p_off, p_conn, p_tgt, p_src, p_coef, p_lo, p_hi = [0], [], [], [], [], [], []
        weights = c.w_standard + c.w_modulatory  # a connection is of one kind only
        for b in range(N):
            ks = np.flatnonzero(c.input_channel[b] >= 0)
            in_neuron += ks.tolist()
            in_chan += c.input_channel[b, ks].tolist()
            in_off.append(len(in_neuron))
            for i in np.flatnonzero(computed[b]).tolist():
                t = len(tgt_neuron)
                js = np.flatnonzero(c.connected[b, :, i])  # ascending source order
                tgt_agent.append(b)
                tgt_neuron.append(i)
                tgt_bias.append(c.bias[b, i])
                tgt_act.append(int(c.activation[b, i]))
                tgt_mod.append(bool(c.modulatory[b, js].any()))
                for j in js.tolist():
                    if c.plastic[b, j, i]:
                        eta, *abcd = c.rule[:, b, j, i].tolist()
                        p_conn.append(len(conn_src))
                        p_tgt.append(t)
                        p_src.append(j)
                        p_coef.append([eta * v for v in abcd])  # eta*A, eta*B, eta*C, eta*D
                        p_lo.append(c.bounds[0, b, j, i])
                        p_hi.append(c.bounds[1, b, j, i])
                    conn_src.append(j)
                    conn_kind.append(bool(c.modulatory[b, j]))
                    conn_w0.append(weights[b, j, i])
                conn_off.append(len(conn_src))
            tgt_off.append(len(tgt_neuron))
            p_off.append(len(p_conn))
        ints = lambda v: np.asarray(v, dtype=np.int64)  # noqa: E731
        floats = lambda v: np.asarray(v, dtype=np.float64)  # noqa: E731
        self._in = (ints(in_off), ints(in_neuron), ints(in_chan))
        self._tgt_off, self._tgt_neuron = ints(tgt_off), ints(tgt_neuron)
        self._tgt_agent = ints(tgt_agent)
        self._tgt_bias, self._tgt_act = floats(tgt_bias), np.asarray(tgt_act, dtype=np.int8)
        self._tgt_mod = np.asarray(tgt_mod, dtype=np.bool_)
        self._conn_off, self._conn_src = ints(conn_off), ints(conn_src)
        self._conn_kind = np.asarray(conn_kind, dtype=np.bool_)
        self._w0 = floats(conn_w0)
        self._w = self._w0.copy()  # current weights of every connection
        self._p_off, self._p_conn, self._p_tgt, self._p_src = ints(p_off), ints(p_conn), ints(p_tgt), ints(p_src)
        self._p_coef = floats(p_coef).reshape(-1, 4)
        self._p_lo, self._p_hi = floats(p_lo), floats(p_hi)
        self._P = len(p_conn)
        self._conn_agent = np.repeat(self._tgt_agent, np.diff(self._conn_off)) if len(conn_src) else ints([])
        T = len(tgt_neuron)
        self._x = np.zeros(T)  # a_i + bias_i
        self._h = np.zeros(2 * T)  # x/2, then m/2; tanh of both after the first kernel
        self._m = np.zeros(T)  # m_i of the last step (for viewers)
        self._new = np.zeros(T)
        self._o = np.zeros((N, n))  # neuron values
        self._bias_at = np.nonzero(c.is_bias)
        self._o[self._bias_at] = 1.0
        self._outputs = np.ascontiguousarray(c.outputs)
        out_act = np.take_along_axis(c.activation, c.outputs, axis=1)
        self._out_scale = np.where(out_act == LOGISTIC, 2.0, 1.0)
        self._out_offset = np.where(out_act == LOGISTIC, -1.0, 0.0)
        self._cmd = np.zeros((N, 2))
        self._everyone = np.ones(N, dtype=np.bool_)
        self.bad_count = 0  #: agents given NaN commands by the last step

    # -- the protocol ---------------------------------------------------------------
    def reset_lifetime(self, seeds: np.ndarray) -> None:
        """Restore every agent's initial weights and clear activations; ``seeds`` (N,) unused."""
        np.copyto(self._w, self._w0)
        self._o.fill(0.0)
        self._o[self._bias_at] = 1.0
        self._m.fill(0.0)

    def reset_trial(self, mask: np.ndarray) -> None:
        """Clear activations of the agents where ``mask`` (N,) is true; weights are kept."""
        mask = np.asarray(mask, dtype=bool)
        self._o[mask] = 0.0
        self._o[self._bias_at] = 1.0
        self._m[mask[self._tgt_agent]] = 0.0

    def act(self, obs: np.ndarray, active: np.ndarray | None = None) -> np.ndarray:
        """One synchronous step of every network: ``obs`` (N, C) -> wheel commands (N, 2).

        ``active`` (N,) bool, optional: step only these agents; the others keep their
        state and get zero commands."""
        obs = np.ascontiguousarray(obs, dtype=np.float64)
        N = self.n_agents
        if obs.shape != (N, self.layout.size):
            raise ValueError(f"observations of shape {obs.shape}; expected ({N}, {self.layout.size})")
        if active is None:
            active = self._everyone
        return self.step_active(obs, np.ascontiguousarray(active, dtype=np.bool_)).copy()

    #: the simulator may call :meth:`step_active` instead of :meth:`act`
    steps_active = True

    def step_active(self, obs: np.ndarray, active: np.ndarray) -> np.ndarray:
        """The step of the agents where ``active`` is true, into the controller's own
        command buffer (the simulator's fast path: ``obs`` (N, C) float64 and ``active``
        (N,) bool, both C-contiguous; no checks). The buffer is reused by the next call."""
        in_off, in_neuron, in_chan = self._in
        _sums_kernel(obs, active, self._o, in_off, in_neuron, in_chan, self._tgt_off, self._conn_off,
                     self._conn_src, self._conn_kind, self._w, self._tgt_bias, self._x, self._h, self._m)
        np.tanh(self._h, out=self._h)  # finite or NaN arguments: no floating-point warnings
        self.bad_count = _update_kernel(active, self._o, self._tgt_off, self._tgt_neuron, self._tgt_act, self._tgt_mod, self._x,
                       self._h, self._new, self._p_off, self._p_conn, self._p_tgt, self._p_src, self._p_coef,
                       self._p_lo, self._p_hi, self._w, self._outputs, self._out_scale, self._out_offset, self._cmd)
        return self._cmd

    # -- batching and inspection ----------------------------------------------------
    @classmethod
    def combine(cls, controllers: list[NetworkController]) -> NetworkController:
        """Fuse controllers into one batch, agents in order, each keeping its current state."""
        layout = controllers[0].layout
        if any(c.layout != layout for c in controllers):
            raise ValueError("cannot combine network controllers built for different observation layouts")
        out = cls([s for c in controllers for s in c.specs], layout)
        row = 0
        for c in controllers:
            rows = slice(row, row + c.n_agents)
            out._o[rows, : c._n] = c._o
            t0, t1 = out._tgt_off[row], out._tgt_off[row + c.n_agents]
            out._m[t0:t1] = c._m
            q0, q1 = out._conn_off[t0], out._conn_off[t1]
            out._w[q0:q1] = c._w
            row += c.n_agents
        return out

    def state(self) -> dict[str, np.ndarray]:
        """Copies for viewers and replays: ``outputs`` (N, n) neuron values o,
        ``modulation`` (N, n) m_i of the last step, ``weights`` (N, n, n) current weights
        indexed [agent, source j, target i]. Padded entries are 0; see ``neuron_ids``."""
        N, n = self.n_agents, self._n
        mod = np.zeros((N, n))
        mod[self._tgt_agent, self._tgt_neuron] = self._m
        w = np.zeros((N, n, n))
        targets = np.repeat(self._tgt_neuron, np.diff(self._conn_off))
        w[self._conn_agent, self._conn_src, targets] = self._w + 0.0
        return {"outputs": self._o.copy(), "modulation": mod, "weights": w}

    def faulted(self) -> np.ndarray:
        """(N,) bool: the agent holds a non-finite neuron value or plastic weight."""
        bad = ~np.isfinite(self._o).all(axis=1)
        if self._P:
            broken = ~np.isfinite(self._w[self._p_conn])
            if broken.any():
                bad[self._conn_agent[self._p_conn[broken]]] = True
        return bad


@njit(cache=True, nogil=True)
def _sums_kernel(obs, active, o, in_off, in_neuron, in_chan, tgt_off, conn_off, conn_src, conn_kind, w,
                 tgt_bias, x, h, m):  # pragma: no cover - compiled
    """Steps 1 and 2: present the inputs, then per computed neuron the standard sum (plus
    bias) and the modulatory sum in ascending source order; h gets x/2 and m/2."""
    T = x.shape[0]
    for b in range(o.shape[0]):
        if not active[b]:
            continue
        for q in range(in_off[b], in_off[b + 1]):
            o[b, in_neuron[q]] = obs[b, in_chan[q]]
        for t in range(tgt_off[b], tgt_off[b + 1]):
            s0 = 0.0
            s1 = 0.0
            for q in range(conn_off[t], conn_off[t + 1]):
                v = w[q] * o[b, conn_src[q]]
                if conn_kind[q]:
                    s1 = s1 + v
                else:
                    s0 = s0 + v
            xt = s0 + tgt_bias[t]
            x[t] = xt
            h[t] = xt * 0.5
            m[t] = s1
            h[T + t] = s1 * 0.5


@njit(cache=True, nogil=True)
def _update_kernel(active, o, tgt_off, tgt_neuron, tgt_act, tgt_mod, x, h, new, p_off, p_conn, p_tgt, p_src, p_coef,
                   p_lo, p_hi, w, outputs, out_scale, out_offset, cmd):  # pragma: no cover - compiled
    """Steps 3 to 5 on the tanh values in h: outputs, the plastic rule, the neuron writes
    and the wheel commands."""
    T = x.shape[0]
    n_bad = 0
    for b in range(o.shape[0]):
        if not active[b]:
            cmd[b, 0] = 0.0
            cmd[b, 1] = 0.0
            continue
        bad = False
        for t in range(tgt_off[b], tgt_off[b + 1]):
            code = tgt_act[t]
            if code == LINEAR:
                new[t] = x[t]
            elif code == LOGISTIC:
                new[t] = 0.5 * (1.0 + h[t])
            else:
                new[t] = h[t]
            if not np.isfinite(new[t]):
                bad = True
        for q in range(p_off[b], p_off[b + 1]):
            t = p_tgt[q]
            pre = o[b, p_src[q]]
            post = new[t]
            dw = p_coef[q, 0] * post
            dw = dw + p_coef[q, 1]
            dw = dw * pre
            aux = p_coef[q, 2] * post
            aux = aux + p_coef[q, 3]
            dw = dw + aux
            if tgt_mod[t]:
                dw = h[T + t] * dw
            k = p_conn[q]
            v = dw + w[k]
            if v < p_lo[q]:
                v = p_lo[q]
            if v > p_hi[q]:
                v = p_hi[q]
            if not np.isfinite(v):
                bad = True
            w[k] = v
        for t in range(tgt_off[b], tgt_off[b + 1]):
            o[b, tgt_neuron[t]] = new[t]
        for side in range(2):
            c = o[b, outputs[b, side]] * out_scale[b, side] + out_offset[b, side]
            if c < -1.0:
                c = -1.0
            if c > 1.0:
                c = 1.0
            cmd[b, side] = np.nan if bad else c
        if bad:
            n_bad += 1
    return n_bad


def network_factory(specs: Sequence[NetworkSpec] | NetworkSpec) -> ControllerFactory:
    """A factory building a :class:`NetworkController` for a world's layout."""
    specs = [specs] if isinstance(specs, NetworkSpec) else list(specs)
    return lambda layout: NetworkController(specs, layout)

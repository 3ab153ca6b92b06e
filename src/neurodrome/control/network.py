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

   (../shared/REFERENCES.md section 2; M_i = 1 is the plain Hebbian case), then is clipped
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
   [-1, 1]. NaN passes through unchanged: ``act`` never raises on a non-finite value, the
   simulator stops that agent; :meth:`NetworkController.faulted` reports which agents
   hold a non-finite value. After a fault an agent's values are not specified further.

``reset_trial(mask)`` zeroes o and m of the masked agents and keeps their weights (what
was learned carries over to the next trial); ``reset_lifetime(seeds)`` restores every
agent's initial weights and zeroes o and m. Networks are deterministic: seeds are unused.

Bit-identity
------------
An agent's results are bit-identical whatever batch it runs in and however much padding
surrounds it. Matrix products (BLAS) and ``numpy.sum`` pick summation orders and kernels
by array size, so the sums of step 2 are an explicit loop over the source index j in
fixed order, each iteration one vectorised add of the (2, T, N) products of source j
(T = the most hidden + output neurons of any network in the batch). Padded neurons have
value 0 and padded weights are 0, so padding only adds exact zeros after the real terms.
Everything else is elementwise.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

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
        N, n, C = c.n_agents, c.size, layout.size
        self.n_agents = N
        self.neuron_ids = c.neuron_ids
        fed = (c.input_channel >= 0) | c.is_bias
        computed = c.is_real & ~fed
        # Internal arrays put the agent axis last so every vectorised operation runs over
        # contiguous memory. Only computed (hidden and output) neurons get a target slot:
        # slot t of agent b is its t-th computed neuron in file order; padded slots and
        # padded writes land in row n of the neuron array, a junk row no loop reads.
        T = max(1, int(computed.sum(axis=1).max()))
        F = max(1, int((c.input_channel >= 0).sum(axis=1).max()))
        self._n, self._T = n, T
        slot_neuron = np.full((T, N), n, dtype=np.int64)
        for b in range(N):
            ks = np.flatnonzero(computed[b])
            slot_neuron[: len(ks), b] = ks
        agents = np.arange(N)
        self._slot_neuron = slot_neuron
        self._slot_flat = slot_neuron * N + agents  # into the (n + 1, N) neuron array
        is_input = c.input_channel >= 0
        in_neuron = np.full((F, N), n, dtype=np.int64)
        in_col = np.zeros((F, N), dtype=np.int64)
        for b in range(N):
            ks = np.flatnonzero(is_input[b])
            in_neuron[: len(ks), b] = ks
            in_col[: len(ks), b] = c.input_channel[b, ks]
        self._in_dst = (in_neuron * N + agents).ravel()
        self._in_src = (agents * C + in_col).ravel()  # into obs (N, C), row-major
        self._in_buf = np.zeros(self._in_src.shape)
        self._bias_rows = np.nonzero(c.is_bias.T)  # (neuron, agent) pairs set to 1
        self._sources = [j for j in range(n) if c.connected[:, j, :].any()]
        real_slot = slot_neuron < n
        sl = np.minimum(slot_neuron, n - 1)
        take = lambda a: np.where(real_slot, a[agents, sl], 0)  # noqa: E731  (N, n) -> (T, N)
        self._bias = take(c.bias).astype(np.float64)
        self._is_log = take(c.activation == LOGISTIC).astype(bool)
        self._is_lin = take(c.activation == LINEAR).astype(bool)
        self._mixed = bool(self._is_log.any() or self._is_lin.any())
        has_mod = (c.connected & c.modulatory[:, :, None]).any(axis=1)
        self._has_mod = take(has_mod).astype(bool)
        self._any_mod = bool(self._has_mod.any())
        self._no_mod = ~self._has_mod
        # Weights: a flat buffer laid out [source j, source kind, target slot t, agent]
        # plus one junk element for padded plastic writes.
        w_by_kind = np.stack([c.w_standard, c.w_modulatory])  # (2, N, n, n) [kind, b, j, i]
        w0 = np.zeros((n, 2, T, N))
        for b in range(N):
            ks = slot_neuron[:, b][real_slot[:, b]]
            w0[:, :, : len(ks), b] = w_by_kind[:, b][:, :, ks].transpose(1, 0, 2)
        self._w0 = np.concatenate([w0.ravel(), [0.0]])
        self._buf = self._w0.copy()
        self._w = self._buf[:-1].reshape(n, 2, T, N)
        # Plastic connections as per-agent lists (row-major j, i order), padded.
        P = int(c.plastic.sum(axis=(1, 2)).max())
        self._P = P
        slot_of = np.full((N, n), -1, dtype=np.int64)
        for b in range(N):
            ks = slot_neuron[:, b][real_slot[:, b]]
            slot_of[b, ks] = np.arange(len(ks))
        self._p_flat = np.full((P, N), self._buf.size - 1, dtype=np.int64)
        self._p_src = np.zeros((P, N), dtype=np.int64)
        self._p_tgt = np.zeros((P, N), dtype=np.int64)
        self._p_rule = np.zeros((5, P, N))
        self._p_lo = np.zeros((P, N))
        self._p_hi = np.zeros((P, N))
        for b in range(N):
            js, is_ = np.nonzero(c.plastic[b])
            k, ts = len(js), slot_of[b, is_]
            kinds = c.modulatory[b, js].astype(np.int64)
            self._p_flat[:k, b] = ((js * 2 + kinds) * T + ts) * N + b
            self._p_src[:k, b] = js * N + b
            self._p_tgt[:k, b] = ts * N + b
            self._p_rule[:, :k, b] = c.rule[:, b, js, is_]
            self._p_lo[:k, b], self._p_hi[:k, b] = c.bounds[0, b, js, is_], c.bounds[1, b, js, is_]
        self._p_w0 = self._buf[self._p_flat]
        self._p_coef = self._p_rule[0] * self._p_rule[1:]  # eta*A, eta*B, eta*C, eta*D
        self._p_w = self._p_w0.copy()
        self._out_flat = c.outputs.T * N + agents  # (2, N)
        out_act = np.take_along_axis(c.activation, c.outputs, axis=1).T
        self._out_scale = np.where(out_act == LOGISTIC, 2.0, 1.0)
        self._out_offset = np.where(out_act == LOGISTIC, -1.0, 0.0)
        self._o = np.zeros((n + 1, N))  # neuron values, row n is junk
        self._acc = np.zeros((2, T, N))
        self._prod = np.zeros((n, 2, T, N))
        self._x = np.zeros((T, N))
        self._t = np.zeros((T, N))
        self._p_pre, self._p_post, self._p_dw, self._p_aux = (np.zeros((P, N)) for _ in range(4))
        self._o[self._bias_rows] = 1.0

    # -- the protocol ---------------------------------------------------------------
    def reset_lifetime(self, seeds: np.ndarray) -> None:
        """Restore every agent's initial weights and clear activations; ``seeds`` (N,) unused."""
        np.copyto(self._buf, self._w0)
        np.copyto(self._p_w, self._p_w0)
        self._o.fill(0.0)
        self._o[self._bias_rows] = 1.0
        self._acc.fill(0.0)

    def reset_trial(self, mask: np.ndarray) -> None:
        """Clear activations of the agents where ``mask`` (N,) is true; weights are kept."""
        mask = np.asarray(mask, dtype=bool)
        self._o[:, mask] = 0.0
        self._o[self._bias_rows] = 1.0
        self._acc[:, :, mask] = 0.0

    def act(self, obs: np.ndarray) -> np.ndarray:
        """One synchronous step of every network: ``obs`` (N, C) -> wheel commands (N, 2)."""
        obs = np.ascontiguousarray(obs, dtype=np.float64)
        N = self.n_agents
        if obs.shape != (N, self.layout.size):
            raise ValueError(f"observations of shape {obs.shape}; expected ({N}, {self.layout.size})")
        with np.errstate(all="ignore"):
            return self._step(obs)

    def _step(self, obs: np.ndarray) -> np.ndarray:
        o, acc, w = self._o, self._acc, self._w
        o_flat = o.reshape(-1)
        np.take(obs.reshape(-1), self._in_src, out=self._in_buf, mode="clip")
        o_flat[self._in_dst] = self._in_buf
        # All products in one call, then the sums in fixed source order, one add each.
        prod = np.multiply(w, o[: self._n, None, None, :], out=self._prod)
        acc.fill(0.0)
        for j in self._sources:
            np.add(acc, prod[j], out=acc)
        x = np.add(acc[0], self._bias, out=self._x)
        t = np.tanh(np.multiply(x, 0.5, out=self._t), out=self._t)
        if self._mixed:
            t = np.where(self._is_lin, x, np.where(self._is_log, 0.5 * (1.0 + t), t))
        if self._P:
            pre, post, dw, aux = self._p_pre, self._p_post, self._p_dw, self._p_aux
            np.take(o_flat, self._p_src, out=pre, mode="clip")
            np.take(t.reshape(-1), self._p_tgt, out=post, mode="clip")
            eA, eB, eC, eD = self._p_coef
            # eta (A pre post + B pre + C post + D) as (eta A post + eta B) pre + (eta C post + eta D)
            np.multiply(eA, post, out=dw)
            np.add(dw, eB, out=dw)
            np.multiply(dw, pre, out=dw)
            np.multiply(eC, post, out=aux)
            np.add(aux, eD, out=aux)
            np.add(dw, aux, out=dw)
            if self._any_mod:
                mod = np.multiply(acc[1], 0.5, out=self._x)
                np.tanh(mod, out=mod)
                np.copyto(mod, 1.0, where=self._no_mod)
                np.take(mod.reshape(-1), self._p_tgt, out=aux, mode="clip")
                np.multiply(aux, dw, out=dw)
            dw += self._p_w
            np.clip(dw, self._p_lo, self._p_hi, out=self._p_w)
            self._buf[self._p_flat] = self._p_w
        o_flat[self._slot_flat] = t
        cmd = o_flat[self._out_flat] * self._out_scale + self._out_offset
        return np.clip(cmd, -1.0, 1.0).T.copy()

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
            cols = slice(row, row + c.n_agents)
            out._o[: c._n, cols] = c._o[: c._n]
            out._acc[:, : c._T, cols] = c._acc
            out._p_w[: c._P, cols] = c._p_w
            row += c.n_agents
        out._buf[out._p_flat] = out._p_w
        return out

    def state(self) -> dict[str, np.ndarray]:
        """Copies for viewers and replays: ``outputs`` (N, n) neuron values o,
        ``modulation`` (N, n) m_i of the last step, ``weights`` (N, n, n) current weights
        indexed [agent, source j, target i]. Padded entries are 0; see ``neuron_ids``."""
        N, n = self.n_agents, self._n
        mod = np.zeros((n + 1, N))
        mod.reshape(-1)[self._slot_flat] = self._acc[1]
        w = np.zeros((n, n + 1, N))
        for t in range(self._T):
            w[:, self._slot_neuron[t], np.arange(N)] = self._w[:, 0, t] + self._w[:, 1, t]
        return {
            "outputs": self._o[:n].T.copy(),
            "modulation": mod[:n].T.copy(),
            "weights": w[:, :n].transpose(2, 0, 1).copy(),
        }

    def faulted(self) -> np.ndarray:
        """(N,) bool: the agent holds a non-finite neuron value or plastic weight."""
        bad = ~np.isfinite(self._o[: self._n]).all(axis=0)
        if self._P:
            bad |= ~np.isfinite(self._p_w).all(axis=0)
        return bad


def network_factory(specs: Sequence[NetworkSpec] | NetworkSpec) -> ControllerFactory:
    """A factory building a :class:`NetworkController` for a world's layout."""
    specs = [specs] if isinstance(specs, NetworkSpec) else list(specs)
    return lambda layout: NetworkController(specs, layout)

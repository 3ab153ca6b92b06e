"""The live viewer, headless (SDL's dummy video driver): keys, state, pixels, determinism."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from neurodrome.evaluate import evaluate, write_replay
from neurodrome.world import world_from_data
from neurodrome.world.templates import make

ROOT = Path(__file__).resolve().parents[1]
REFLEX = str(ROOT / "assets" / "courier-reflex.net.json")


@pytest.fixture()
def pg(monkeypatch):
    """pygame with the dummy video driver, set before the display starts."""
    monkeypatch.setenv("SDL_VIDEODRIVER", "dummy")
    monkeypatch.setenv("PYGAME_HIDE_SUPPORT_PROMPT", "1")
    import pygame

    pygame.display.quit()
    yield pygame
    pygame.display.quit()


def small_world(trials: int = 3):
    """A short single junction whose store values swap once, at a fixed trial."""
    return world_from_data(make("junction", trials=trials, stem=1.0, arm=0.7, relocate="fixed"))


def key(pygame, k: int, char: str = ""):
    return pygame.event.Event(pygame.KEYDOWN, key=k, unicode=char, mod=0, scancode=0)


def test_scripted_keys_drive_the_viewer(pg):
    """Pause freezes the step, a single step advances one, Tab hides the panel, N and P
    move between trials, R and T toggle rays and trail (viewer state after each key)."""
    from neurodrome.view.app import Viewer
    from neurodrome.view.playback import LivePlayback

    pb = LivePlayback(small_world(), REFLEX, seed=3)
    viewer = Viewer(pb, speed=1.0)
    seen: dict[str, object] = {}
    script = {
        5: [key(pg, pg.K_SPACE, " ")],
        10: [key(pg, pg.K_RIGHT)],
        20: [key(pg, pg.K_TAB, "\t"), key(pg, pg.K_r, "r"), key(pg, pg.K_t, "t")],
        30: [key(pg, pg.K_SPACE, " ")],
        60: [key(pg, pg.K_n, "n")],
        120: [key(pg, pg.K_p, "p")],
        200: [key(pg, pg.K_h, "h"), key(pg, pg.K_UP)],
    }

    def on_frame(v):
        f = v.frames
        if f == 6:
            seen["paused_at"] = v.pb.step_index
        if f == 10:
            seen["still"] = v.pb.step_index
        if f == 11:
            seen["after_step"] = v.pb.step_index
        if f == 21:
            seen["toggles"] = (v.opts.panel, v.opts.rays, v.opts.trail)
        if f == 61:
            seen["next"] = (v.pb.trial, v.pb.steps_in_trial)
        if f == 121:
            seen["previous"] = (v.pb.trial, v.pb.steps_in_trial)
        for ev in script.get(f, []):
            pg.event.post(ev)

    viewer.run(size=(720, 416), max_frames=300, fixed_dt=1 / 30, on_frame=on_frame)
    assert viewer.frames == 300
    assert seen["still"] == seen["paused_at"], "paused: no simulation step"
    assert seen["after_step"] == seen["paused_at"] + 1, "a single step advances one control step"
    assert seen["toggles"] == (False, False, False)
    assert seen["next"] == (2, 0), "N starts the next trial"
    assert seen["previous"] == (1, 0), "P goes back to the start of the previous trial"
    assert viewer.opts.help and viewer.speed == 2.0
    assert not viewer.paused


def test_viewer_final_score_equals_evaluate(pg):
    """Run to the end in the viewer, restart and run again: both scores equal evaluate's
    with the same seed (same seed, same run; the viewer steps the headless simulator)."""
    from neurodrome.view.app import Viewer
    from neurodrome.view.playback import LivePlayback

    world = small_world(trials=3)
    for source in ("courier-memory", REFLEX):
        expected = evaluate(world, [source], seed=11)[0].fitness
        viewer = Viewer(LivePlayback(world, source, seed=11), speed=64.0)
        scores = []

        def on_frame(v):
            if v.pb.finished and len(scores) < 2:
                scores.append(v.pb.fitness)
                if len(scores) == 1:
                    pg.event.post(key(pg, pg.K_HOME))
            if len(scores) == 2:
                v.quit = True

        viewer.run(size=(640, 400), max_frames=2000, fixed_dt=0.25, on_frame=on_frame)
        assert scores == [expected, expected], source


def test_frame_shows_robot_and_store_colours(pg):
    """At the start the robot's pixel has the robot colour and each store's centre the
    store fill composited over the floor ("over" operator: a*src + (1-a)*dst, common
    practice in alpha blending)."""
    from neurodrome.view.draw import PygameCanvas
    from neurodrome.view.palette import DEFAULT
    from neurodrome.view.playback import LivePlayback
    from neurodrome.view.show import Show, ShowOptions

    pb = LivePlayback(small_world(), REFLEX, seed=0)
    show = Show(pb)
    canvas = PygameCanvas((1280, 720))
    show.draw(canvas, ShowOptions())
    img = canvas.to_array()
    vp = show.viewport
    x, y = vp.to_px(*pb.pose[:2])
    assert tuple(img[round(y), round(x)]) == DEFAULT.robot[:3]
    best = max(pb.site_values)
    for site, value in zip(pb.spec.sites, pb.site_values):
        fill = DEFAULT.site_best_fill if value == best else DEFAULT.site_fill
        a = fill[3] / 255
        want = np.array([a * fill[k] + (1 - a) * DEFAULT.floor[k] for k in range(3)])
        sx, sy = vp.to_px(*site.position)
        got = img[round(sy), round(sx)].astype(float)
        assert np.abs(got - want).max() <= 2, site.name


def test_click_charts_the_connection(pg):
    """A click on a connection of the network panel selects it, and the chart then
    follows that connection's live weight from the controller's own state."""
    from neurodrome.view.draw import PygameCanvas
    from neurodrome.view.playback import LivePlayback
    from neurodrome.view.show import Show, ShowOptions

    pb = LivePlayback(small_world(), REFLEX, seed=0)
    show = Show(pb)
    canvas = PygameCanvas((1280, 720))
    show.draw(canvas, ShowOptions())
    panel = show.panel
    first = panel.selected
    others = [k for k in range(len(panel.links)) if k != first]
    chosen = None
    for k in others:
        px, py = panel.link_midpoint(k)
        if panel.pick(px, py) == k:
            chosen = k
            break
    assert chosen is not None and panel.selected == chosen
    for _ in range(5):
        show.step()
    link = panel.links[chosen]
    state = pb.controller.state()
    assert panel.history[-1][2] == state["weights"][0, link.source, link.target]


def test_screenshot_key_writes_png(pg, tmp_path):
    """S saves the window as a PNG of the window's size in the screenshot folder."""
    from neurodrome.view.app import Viewer
    from neurodrome.view.playback import LivePlayback

    viewer = Viewer(LivePlayback(small_world(), "courier-memory", seed=0), screenshot_dir=tmp_path)

    def on_frame(v):
        if v.frames == 3:
            pg.event.post(key(pg, pg.K_s, "s"))

    viewer.run(size=(800, 480), max_frames=6, fixed_dt=1 / 30, on_frame=on_frame)
    assert len(viewer.screenshots) == 1
    image = pg.image.load(str(viewer.screenshots[0]))
    assert image.get_size() == (800, 480)


def test_replay_playback_matches_evaluate(pg, tmp_path):
    """A replay written by evaluate plays back to the same final score, trial count and
    restocks as the evaluation's own result."""
    from neurodrome.view.app import Viewer
    from neurodrome.view.playback import open_playback

    world = small_world(trials=3)
    path = tmp_path / "run.npz"
    result = write_replay(world, ["courier-memory", REFLEX], path, agent_ids=[0, 1], seed=4)
    for row in (0, 1):
        pb = open_playback(str(path), None, agent=row)
        viewer = Viewer(pb, speed=64.0)
        viewer.run(size=(640, 400), max_frames=400, fixed_dt=0.25,
                   on_frame=lambda v: setattr(v, "quit", v.pb.finished))
        assert pb.fitness == result[row].fitness
        assert pb.trial == len(result[row].trials)
        assert pb.relocations == len(result[row].relocations)
        pb.goto_trial(2)
        assert (pb.trial, pb.steps_in_trial, pb.trial_score) == (2, 0, 0.0)


def test_watch_without_display_points_to_record(tmp_path):
    """With no display and no SDL driver chosen, watch exits 2 with a message naming
    'neurodrome record' and no traceback."""
    env = {k: v for k, v in os.environ.items() if k not in ("DISPLAY", "WAYLAND_DISPLAY", "SDL_VIDEODRIVER")}
    world = ROOT / "worlds" / "clinic-junction.json"
    code = "import sys; from neurodrome.cli import main; sys.exit(main(sys.argv[1:]))"
    proc = subprocess.run([sys.executable, "-c", code, "watch", str(world), "courier-memory"],
                          capture_output=True, text=True, env=env, cwd=tmp_path)
    assert proc.returncode == 2
    assert "neurodrome record" in proc.stderr
    assert "Traceback" not in proc.stderr


def test_viewer_modules_import_without_pygame_side_effects():
    """Importing the viewer, panel, status and recorder modules opens nothing and does
    not import pygame (it loads when a window or canvas is made)."""
    code = ("import sys, neurodrome.view.app, neurodrome.view.netpanel, neurodrome.view.hud, "
            "neurodrome.record, neurodrome.cli.media_cmds; print('pygame' in sys.modules)")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "False"


def test_chart_follows_a_plastic_weight_as_it_learns(pg):
    """The charted weight of a plastic bias -> left-wheel connection changes every step by
    the plain Hebbian rule dw = eta (A o_j o_i + D) with o_j = 1 (Soltoggio et al. 2008, ALife XI,
    no modulatory input so the factor is 1), read from the panel's own history."""
    from neurodrome.view.playback import LivePlayback
    from neurodrome.view.show import Show

    eta, A, D = 0.05, 1.0, -0.02
    net = {
        "format": "neurodrome-network", "version": 1, "name": "hebb-check",
        "rule": {"learning_rate": eta, "correlation": A, "presynaptic": 0.0, "postsynaptic": 0.0, "constant": D},
        "weight_bounds": [-2.0, 2.0],
        "neurons": [{"id": "front", "role": "input", "channel": "range_3"}, {"id": "b", "role": "bias"},
                    {"id": "L", "role": "output", "wheel": "left"}, {"id": "R", "role": "output", "wheel": "right"}],
        "connections": [{"source": "b", "target": "L", "weight": 0.5, "plastic": True},
                        {"source": "b", "target": "R", "weight": 0.5},
                        {"source": "front", "target": "L", "weight": -1.0}],
    }
    pb = LivePlayback(small_world(), net, seed=0)
    show = Show(pb)
    panel = show.panel
    assert panel.links[panel.selected].plastic
    left = pb.neuron_ids.index("L")
    for _ in range(20):
        before = panel.history[-1][2]
        events = show.step()
        if any(kind == "trial-start" for kind, _ in events):
            continue
        after = panel.history[-1][2]
        o_i = float(pb.net.outputs[left])
        assert after - before == pytest.approx(eta * (A * 1.0 * o_i + D), abs=1e-12)
    weights = [w for _, _, w in panel.history]
    assert len(set(weights)) > 10, "the weight changes live"


def test_status_and_restock_cue_are_drawn(pg):
    """After the restock (values swap at the world file's fixed trial) the status
    shows the trial, score and one restock, and a banner names both stores' changes."""
    from neurodrome.view.draw import RecordingCanvas
    from neurodrome.view.playback import LivePlayback
    from neurodrome.view.show import Show, ShowOptions

    world = small_world()
    pb = LivePlayback(world, "courier-memory", seed=0)
    show = Show(pb)
    before = dict(world.task.site_values)
    while pb.relocations == 0:
        show.step()
    canvas = RecordingCanvas(1280, 720)
    show.draw(canvas, ShowOptions())
    texts = [c["text"] for c in canvas.named("text")]
    after = world.task.relocations[0].after_trial
    assert f"{after + 1} of 3" in texts and "1" in texts and f"{pb.fitness:+.2f}" in texts
    banner = next(t for t in texts if t.startswith(f"RESTOCK after trial {after}"))
    for name, value in before.items():
        assert f"{name} {value:g} -> {pb.site_value_map()[name]:g}" in banner
    rings = [c for c in canvas.named("circle") if c["fill"] is None and c["width"] == 5]
    assert len(rings) >= len(world.sites), "a pulsing ring on each store whose value moved"


@pytest.mark.parametrize("hidden", [3, 24])
def test_panel_labels_of_many_hidden_neurons_do_not_cover_nodes(pg, hidden):
    """A wide hidden layer wraps into staggered sub-columns: no hidden neuron's label box
    (drawn under the node) overlaps another hidden node's disc."""
    from neurodrome.view.draw import PygameCanvas
    from neurodrome.view.playback import LivePlayback
    from neurodrome.view.show import Show

    neurons = [{"id": "front", "role": "input", "channel": "range_3"}, {"id": "b", "role": "bias"},
               {"id": "L", "role": "output", "wheel": "left"}, {"id": "R", "role": "output", "wheel": "right"}]
    connections = [{"source": "b", "target": "R", "weight": 0.5}]
    for k in range(hidden):
        neurons.append({"id": f"hid-{k}", "role": "hidden"})
        connections += [{"source": "front", "target": f"hid-{k}", "weight": 0.1},
                        {"source": f"hid-{k}", "target": "L", "weight": 0.1}]
    net = {"format": "neurodrome-network", "version": 1, "name": "wide", "neurons": neurons,
           "connections": connections}
    show = Show(LivePlayback(small_world(), net, seed=0))
    canvas = PygameCanvas((1280, 720))
    show.panel.draw(canvas, (850, 60, 420, 620), show.pb.net)
    r = show.panel._radius
    ids = show.pb.neuron_ids
    hid = [(n, show.panel._pos[n.index]) for n in show.panel.neurons if n.column == "hidden"]
    assert len(hid) == hidden
    for n, (x, y) in hid:
        w, h = canvas.text_size(n.id, 12)
        box = (x - w / 2, y + 1.5 * r + 2, x + w / 2, y + 1.5 * r + 2 + h)
        for m, (u, v) in hid:
            if m is n:
                continue
            nearest_x = min(max(u, box[0]), box[2])
            nearest_y = min(max(v, box[1]), box[3])
            assert (nearest_x - u) ** 2 + (nearest_y - v) ** 2 > r * r, (n.id, m.id)
    assert len(ids) == hidden + 4

"""Recording trials to video, headless: frame count, size and rate read back with imageio."""

from __future__ import annotations

import math
import sys
from pathlib import Path

import pytest

from neurodrome.cli import main
from neurodrome.errors import MissingExtraError, NeurodromeError
from neurodrome.evaluate import evaluate, write_replay
from neurodrome.record import parse_size, parse_trials, record, simulation_frames, TITLE_SECONDS
from neurodrome.world import world_from_data, world_to_data
from neurodrome.world.templates import make

ROOT = Path(__file__).resolve().parents[1]
REFLEX = str(ROOT / "assets" / "courier-reflex.net.json")


@pytest.fixture(autouse=True)
def dummy_video(monkeypatch):
    """Headless SDL for every test here (the recorder never opens a window)."""
    monkeypatch.setenv("SDL_VIDEODRIVER", "dummy")


def small_world(trials: int = 3):
    """A short single junction whose store values swap once, at a fixed trial."""
    return world_from_data(make("junction", trials=trials, stem=1.0, arm=0.7, relocate="fixed"))


def expected_frames(steps: int, fps: float, period: float, speed: float, title: bool, hold_s: float) -> int:
    """The documented count: title card, ceil(T * fps * period / speed) + 1 frames of
    simulation, then the held last frame."""
    return (round(TITLE_SECONDS * fps) if title else 0) + math.ceil(steps * fps * period / speed - 1e-9) + 1 + round(hold_s * fps)


def test_mp4_has_the_frames_size_and_rate_asked_for(tmp_path):
    """An MP4 of trials 2..3 read back with imageio (its ffmpeg reader) has the expected
    frame count (steps from evaluate's own trial records), the size and the frame rate."""
    import imageio.v2 as iio
    from neurodrome.view.playback import LivePlayback

    world = small_world()
    result = evaluate(world, ["courier-memory"], seed=2)[0]
    steps = sum(t.steps for t in result.trials[1:3])
    out = tmp_path / "trial.mp4"
    rec = record(LivePlayback(world, "courier-memory", seed=2), out, trials=(2, 3), size=(320, 192), fps=12,
                 speed=4.0, title="restock", hold_s=0.5)
    want = expected_frames(steps, 12, world.physics.control_period_s, 4.0, True, 0.5)
    assert rec.frames == want
    assert rec.score == result.fitness
    reader = iio.get_reader(str(out), format="FFMPEG")
    meta = reader.get_meta_data()
    assert reader.count_frames() == want
    assert tuple(meta["size"]) == (320, 192)
    assert meta["fps"] == pytest.approx(12.0)
    assert "h264" in meta["codec"]
    reader.close()


def test_gif_from_a_replay_file(tmp_path):
    """A GIF recorded from a replay file has the expected frames and size and a frame
    duration of 1/fps (read back with imageio's pillow reader; GIF stores 1/100 s)."""
    import imageio.v3 as iio3

    world = small_world(trials=2)
    replay = tmp_path / "run.npz"
    result = write_replay(world, [REFLEX], replay, agent_ids=[0], seed=1)[0]
    out = tmp_path / "clip.gif"
    code = main(["record", str(replay), "-o", str(out), "--trials", "1:1", "--size", "256x160", "--fps", "10",
                 "--speed", "2", "--hold", "0", "--no-progress"])
    assert code == 0
    frames = iio3.imread(out, index=None)
    want = expected_frames(result.trials[0].steps, 10, world.physics.control_period_s, 2.0, False, 0.0)
    assert frames.shape[:3] == (want, 160, 256)
    assert iio3.immeta(out, index=1)["duration"] == 100


def test_sizes_round_to_multiples_of_16():
    """--size rounds to the nearest multiple of 16 and says so; nonsense is refused."""
    assert parse_size("1280x720") == ((1280, 720), None)
    size, note = parse_size("650x401")
    assert size == (656, 400) and "656x400" in note
    for bad in ("1280", "wide x tall", "10x10", "1280x-720"):
        with pytest.raises(NeurodromeError):
            parse_size(bad)


def test_trial_ranges():
    """--trials A:B is inclusive from 1; open ends mean first or last; out of range is refused."""
    assert parse_trials(None, 10) == (1, 10)
    assert parse_trials("3:5", 10) == (3, 5)
    assert parse_trials("4", 10) == (4, 4)
    assert parse_trials(":2", 10) == (1, 2)
    assert parse_trials("8:", 10) == (8, 10)
    for bad in ("0:2", "5:3", "9:11", "a:b"):
        with pytest.raises(NeurodromeError):
            parse_trials(bad, 10)


def test_frame_count_formula_counts_instants():
    """At one frame per step, T steps give T + 1 frames (every instant, both ends)."""
    assert simulation_frames(49, 10, 0.1, 1.0) == 50
    assert simulation_frames(48, 10, 0.1, 4.0) == 13
    assert simulation_frames(49, 10, 0.1, 4.0) == 14


def test_missing_encoder_names_the_video_extra(tmp_path, monkeypatch, capsys):
    """Without imageio-ffmpeg, record exits 2 and the message names neurodrome[video]."""
    monkeypatch.setitem(sys.modules, "imageio_ffmpeg", None)
    world = tmp_path / "w.json"
    import json

    world.write_text(json.dumps(world_to_data(small_world())))
    code = main(["record", str(world), "courier-memory", "-o", str(tmp_path / "x.mp4")])
    assert code == 2
    assert "neurodrome[video]" in capsys.readouterr().err
    with pytest.raises(MissingExtraError) as info:
        from neurodrome.record import _Encoder

        _Encoder(tmp_path / "y.mp4", (64, 64), 10, "mp4")
    assert info.value.extra == "video"


def test_bad_output_name_is_refused(tmp_path, capsys):
    """An output that is neither .mp4 nor .gif exits 2 with the expected names."""
    code = main(["record", str(ROOT / "worlds" / "clinic-junction.json"), "courier-memory", "-o", str(tmp_path / "x.avi")])
    assert code == 2
    assert ".mp4 or .gif" in capsys.readouterr().err

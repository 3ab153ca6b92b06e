"""The drawing interface: viewport maths, the recording back end, pixels of a preview."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from neurodrome.view.draw import RecordingCanvas, Viewport
from neurodrome.view.palette import DEFAULT
from neurodrome.view.scene import draw_world, fit_viewport
from neurodrome.world import build_geometry, load_world

WORLDS = Path(__file__).resolve().parents[1] / "worlds"


def test_viewport_y_up_and_inverse():
    """World y up maps to pixel y down; to_world inverts to_px; the fit keeps the margin."""
    vp = Viewport((0.0, 0.0, 4.0, 2.0), (0, 0, 440, 240), margin=20)
    assert vp.scale == pytest.approx(100.0)
    assert vp.to_px(0.0, 0.0) == pytest.approx((20.0, 220.0))
    assert vp.to_px(4.0, 2.0) == pytest.approx((420.0, 20.0))
    assert vp.to_world(*vp.to_px(1.25, 0.5)) == pytest.approx((1.25, 0.5))
    pts = np.array([[0.0, 0.0], [4.0, 2.0]])
    assert vp.to_px_array(pts) == pytest.approx(np.array([[20.0, 220.0], [420.0, 20.0]]))


def test_recorded_scene_draws_every_part():
    """draw_world draws all walls, one circle per site at its scaled radius, and value labels."""
    spec = load_world(WORLDS / "clinic-junction-restock.json")
    geometry = build_geometry(spec)
    canvas = RecordingCanvas(800, 600)
    vp = fit_viewport(spec, geometry, canvas.size)
    draw_world(canvas, vp, spec, geometry)
    assert canvas.calls[0] == ("clear", {"color": DEFAULT.ground})
    wall_rows = sum(len(c["segments"]) for c in canvas.named("segments") if c["color"] == DEFAULT.wall)
    assert wall_rows == len(geometry.walls)
    site_circles = [c for c in canvas.named("circle") if c["outline"] == DEFAULT.site]
    for site in spec.sites:
        assert any(c["center"] == pytest.approx(vp.to_px(*site.position))
                   and c["radius"] == pytest.approx(site.radius * vp.scale) for c in site_circles)
    texts = {c["text"] for c in canvas.named("text")}
    assert {"west-store", "east-store", "0.2 -> 1", "1 -> 0.2", spec.name} <= texts


def test_live_frame_shows_current_values_and_given_rays():
    """With site_values, pose and rays (as the viewer passes), those are what is drawn."""
    spec = load_world(WORLDS / "clinic-junction.json")
    geometry = build_geometry(spec)
    canvas = RecordingCanvas(640, 480)
    vp = fit_viewport(spec, geometry, canvas.size)
    n = len(spec.robot.range_finders.angles_deg)
    rays = np.tile([[0.0, 1.0]], (n, 1))
    draw_world(canvas, vp, spec, geometry, site_values={"west-store": 0.7, "east-store": 0.1},
               robot_pose=(0.0, 0.8, 90.0), rays=rays)
    texts = {c["text"] for c in canvas.named("text")}
    assert {"0.7", "0.1"} <= texts
    ray_calls = [c for c in canvas.named("segments") if c["color"] == DEFAULT.ray]
    assert len(ray_calls) == 1 and np.allclose(ray_calls[0]["segments"][:, 2:], vp.to_px_array(rays))
    body = [c for c in canvas.named("circle") if c["radius"] == pytest.approx(spec.robot.radius * vp.scale)]
    assert len(body) == 1 and body[0]["center"] == pytest.approx(vp.to_px(0.0, 0.8))


def _near(pixel, color, tol=40):
    return int(np.abs(pixel.astype(int) - np.array(color[:3])).max()) <= tol


def test_preview_png_has_colours_where_expected(tmp_path):
    """In the PNG, the wall, the floor, a site and the ground outside have their colours."""
    import pygame

    from neurodrome.view.scene import render_png

    spec = load_world(WORLDS / "clinic-junction.json")
    geometry = build_geometry(spec)
    size = (600, 450)
    out = tmp_path / "w.png"
    render_png(spec, geometry, out, size=size, supersample=2)
    img = pygame.surfarray.array3d(pygame.image.load(str(out))).transpose(1, 0, 2)  # (H, W, 3)
    vp = fit_viewport(spec, geometry, size)

    def px(x, y):
        u, v = vp.to_px(x, y)
        return img[int(round(v)), int(round(u))]

    x0, y0, x1, y1 = geometry.free.bounds
    assert _near(px(0.15, y0), DEFAULT.wall)  # the dispatch-bay end wall, beside the rear ray
    assert _near(px(0.12, 1.05), DEFAULT.floor, tol=12)  # the stem, between the rays
    east = spec.sites[1]
    assert _near(px(east.position[0], east.position[1] - 0.5 * east.radius), DEFAULT.site, tol=110)
    assert _near(px(0.9, 0.4), DEFAULT.ground, tol=8)  # beside the stem: solid ground


def test_world_core_never_imports_pygame():
    """Importing the world package and the lint does not load pygame (core stays light)."""
    code = "import sys, neurodrome.world, neurodrome.world.lint, neurodrome.view.draw; print('pygame' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"

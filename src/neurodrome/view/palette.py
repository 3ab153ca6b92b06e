"""The colour scheme of every picture neurodrome draws.

Hues for things that must be told apart (home, sites, markers, robot, rays) are taken
from the Okabe-Ito set, which stays distinguishable under the common forms of colour
blindness (common practice in scientific figures). The floor is nearly white and the
solid ground outside the corridors dark, so the maze reads at a glance on a projector;
walls are black on the floor edge. Colours are (R, G, B) or (R, G, B, A) with 0..255.
"""

from __future__ import annotations

from dataclasses import dataclass

Color = tuple[int, int, int] | tuple[int, int, int, int]

# Okabe-Ito hues.
ORANGE = (230, 159, 0)
SKY_BLUE = (86, 180, 233)
BLUISH_GREEN = (0, 158, 115)
YELLOW = (240, 228, 66)
BLUE = (0, 114, 178)
VERMILLION = (213, 94, 0)
REDDISH_PURPLE = (204, 121, 167)


def with_alpha(color: Color, alpha: int) -> tuple[int, int, int, int]:
    return (color[0], color[1], color[2], alpha)


@dataclass(frozen=True)
class Palette:
    """Named roles, so drawing code says *what* it draws, not which colour."""

    ground: Color = (44, 48, 56)
    floor: Color = (246, 245, 240)
    wall: Color = (17, 17, 17)
    extra_wall: Color = (17, 17, 17)
    home: Color = BLUE
    home_fill: Color = with_alpha(BLUE, 60)
    site: Color = BLUISH_GREEN
    site_fill: Color = with_alpha(BLUISH_GREEN, 70)
    site_best: Color = BLUISH_GREEN
    site_best_fill: Color = with_alpha(BLUISH_GREEN, 150)
    marker: Color = REDDISH_PURPLE
    marker_fill: Color = with_alpha(REDDISH_PURPLE, 45)
    robot: Color = VERMILLION
    robot_outline: Color = (60, 25, 0)
    ray: Color = ORANGE
    ray_hit: Color = VERMILLION
    text: Color = (25, 25, 25)
    text_on_ground: Color = (240, 240, 240)
    text_muted_on_ground: Color = (185, 190, 200)
    label_bg: Color = (255, 255, 255, 215)
    scale_bar: Color = (240, 240, 240)


DEFAULT = Palette()

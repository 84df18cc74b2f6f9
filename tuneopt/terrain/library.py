"""The built-in terrain types.

The numbers are demo parameters of our own, chosen to look like trail riding; none is a
measurement. The background roughness is ISO 8608 class B to D [?]: a measured unpaved road was
class C (Barbosa 2011), and with a bicycle's light wheel loads the linear quarter-car already
predicts a tyre-load variation near 0.9 of the static load on class D at 9 m/s (Lyapunov, see
docs/references.md), a front wheel skipping on every stretch. Smooth stretches are therefore B, and
the rough types get their roughness mostly from their discrete features. Friction coefficients
follow the scenario range 0.3 (wet roots, mud) to 0.8 (dry hardpack) in docs/references.md [?].
Speeds, feature sizes and corner sizes are common practice, no source.

Everyday features stay below 15 cm on the rough types; what is taller (square edges and ledges
of 15 cm and more, drops to flat, G-outs, jump landings) is a big hit, laid at a fixed rate per
metre so that every realisation of a course carries its share (see BigHits). They are sized to
reach the last third of the travel of a trail or enduro bike at its usual sag (common practice,
no source; checked by simulating the demo scenarios). A G-out's shoulders are convex: with
curvature 2 pi^2 h / L^2 above g / v^2 the wheels leave the ground over them, and short steep
dips ridden fast while braking made the half-car run away, so dips stay long for their depth
(h / L^2 at most about 0.009 1/m). Wet straights are ridden at a share of
the dry speed: most slower over wet roots, least on smooth ground (common practice, no source).

jump_line is at the edge of what the simulator can ride: rolling off a table or a drop, a
passive rider lets the bike pitch nose-down in the air past the half-car's small pitch angles,
and the run ends as failed. Riders steer that with their body; the model does not. Its jumps
therefore stay small, with tables long enough to land on at the straights' speed.
"""

from __future__ import annotations

from types import MappingProxyType

from tuneopt.model.course import TERRAIN_NAMES
from tuneopt.terrain.parameters import (
    BigHits,
    BrakingBumps,
    Corners,
    FeatureKind,
    FeatureSet,
    Roughness,
    Spread,
    TerrainType,
)

__all__ = ["TERRAIN_LIBRARY", "terrain_type"]

_S = Spread

_TYPES = (
    TerrainType(
        name="smooth_hardpack",
        description="packed dirt with long waves, flowing corners and the odd G-out",
        roughness=Roughness.iso_class("B"),
        speed=9.0,
        friction_dry=0.8,
        friction_wet=0.55,
        corners=Corners(gap=_S(40, 100), radius=_S(8, 20), arc=_S(8, 20), decel=_S(2.5, 4.5)),
        min_length=20.0,
        big_hits=(
            BigHits(FeatureKind.COMPRESSION, height=_S(0.35, 0.5), length=_S(8.0, 10.0),
                    every=160.0),
        ),
        wet_speed_factor=0.9,
    ),
    TerrainType(
        name="root_field",
        description="roots across the line as half-rounds, root ledges, tight corners",
        roughness=Roughness.iso_class("C"),
        speed=5.5,
        friction_dry=0.65,
        friction_wet=0.3,
        features=(
            FeatureSet(FeatureKind.ROOT, height=_S(0.03, 0.12), length=_S(0.06, 0.25),
                       gap=_S(0.4, 3.0)),
            FeatureSet(FeatureKind.STEP_DOWN, height=_S(0.04, 0.10), length=_S(0.1, 0.1),
                       gap=_S(4.0, 12.0)),
        ),
        corners=Corners(gap=_S(25, 60), radius=_S(4, 10), arc=_S(5, 12), decel=_S(1.5, 3.5)),
        min_length=20.0,
        big_hits=(
            BigHits(FeatureKind.STEP_DOWN, height=_S(0.18, 0.28), length=_S(0.1, 0.1),
                    every=45.0),
            BigHits(FeatureKind.STEP_UP, height=_S(0.15, 0.22), length=_S(0.1, 0.1),
                    every=60.0),
        ),
        wet_speed_factor=0.8,
    ),
    TerrainType(
        name="rock_garden",
        description="square-edged rocks and ledges up and down, the odd drop",
        roughness=Roughness.iso_class("D"),
        speed=4.5,
        friction_dry=0.75,
        friction_wet=0.4,
        features=(
            FeatureSet(FeatureKind.ROCK, height=_S(0.05, 0.14), length=_S(0.15, 0.6),
                       gap=_S(0.3, 2.5)),
            FeatureSet(FeatureKind.STEP_UP, height=_S(0.05, 0.12), length=_S(0.1, 0.1),
                       gap=_S(3.0, 10.0)),
            FeatureSet(FeatureKind.STEP_DOWN, height=_S(0.08, 0.14), length=_S(0.1, 0.1),
                       gap=_S(3.0, 10.0)),
        ),
        corners=Corners(gap=_S(30, 80), radius=_S(5, 12), arc=_S(5, 12), decel=_S(1.5, 3.0)),
        min_length=20.0,
        big_hits=(
            BigHits(FeatureKind.ROCK, height=_S(0.15, 0.25), length=_S(0.3, 0.8), every=20.0),
            BigHits(FeatureKind.STEP_DOWN, height=_S(0.18, 0.28), length=_S(0.1, 0.1),
                    every=30.0),
            BigHits(FeatureKind.DROP, height=_S(0.3, 0.6), length=_S(1.0, 2.0), every=60.0),
        ),
        wet_speed_factor=0.85,
    ),
    TerrainType(
        name="braking_bumps",
        description="fast straights into corners with ripples dug by braking, G-outs between",
        roughness=Roughness.iso_class("C"),
        speed=8.0,
        friction_dry=0.65,
        friction_wet=0.45,
        corners=Corners(gap=_S(15, 40), radius=_S(4, 10), arc=_S(5, 10), decel=_S(3.0, 5.5)),
        braking_bumps=BrakingBumps(height=_S(0.03, 0.08), wavelength=_S(0.5, 1.2)),
        min_length=40.0,
        big_hits=(
            BigHits(FeatureKind.COMPRESSION, height=_S(0.3, 0.45), length=_S(7.0, 9.0),
                    every=50.0),
        ),
        wet_speed_factor=0.85,
    ),
    TerrainType(
        name="jump_line",
        description="table-top jumps and drops between bermed corners",
        roughness=Roughness.iso_class("B"),
        speed=8.0,
        friction_dry=0.75,
        friction_wet=0.5,
        corners=Corners(gap=_S(20, 40), radius=_S(6, 12), arc=_S(8, 15), decel=_S(2.0, 4.0)),
        min_length=60.0,
        big_hits=(
            # small jumps only: over bigger ones a real rider absorbs the lip and steers the
            # bike's pitch in the air, which the passive rider of the simulator cannot (the bike
            # over-rotates past its small-angle pitch model). Tables of 4 m and more: off a
            # shorter one at the straights' speed the bike flies past the landing to the flat
            # and the run fails
            BigHits(FeatureKind.JUMP, height=_S(0.3, 0.6), length=_S(4.0, 6.0), every=40.0),
            BigHits(FeatureKind.DROP, height=_S(0.25, 0.45), length=_S(1.0, 2.0), every=40.0),
        ),
        wet_speed_factor=0.9,
    ),
    TerrainType(
        name="compression",
        description="fast dips that load the suspension deep into its travel",
        roughness=Roughness.iso_class("B"),
        speed=9.0,
        friction_dry=0.7,
        friction_wet=0.45,
        features=(
            # length at least 6 m: the dip's steepest slope pi*h/L stays under 0.19 (11 deg)
            FeatureSet(FeatureKind.COMPRESSION, height=_S(0.15, 0.35), length=_S(6.0, 12.0),
                       gap=_S(10.0, 30.0)),
        ),
        corners=Corners(gap=_S(50, 120), radius=_S(10, 25), arc=_S(8, 20), decel=_S(2.0, 4.0)),
        min_length=40.0,
        big_hits=(
            # length at least 8.5 m: the dip's steepest slope pi*h/L stays under 0.24 (14 deg)
            BigHits(FeatureKind.COMPRESSION, height=_S(0.4, 0.65), length=_S(8.5, 14.0),
                    every=35.0),
        ),
        wet_speed_factor=0.9,
    ),
)

TERRAIN_LIBRARY = MappingProxyType({t.name: t for t in _TYPES})

if tuple(TERRAIN_LIBRARY) != TERRAIN_NAMES:  # pragma: no cover - caught by the tests too
    raise RuntimeError("terrain library and tuneopt.model.course.TERRAIN_NAMES disagree")


def terrain_type(name: str) -> TerrainType:
    """The built-in terrain type called ``name``; KeyError lists the known names."""
    try:
        return TERRAIN_LIBRARY[name]
    except KeyError:
        raise KeyError(
            f"unknown terrain type {name!r}; known types: {', '.join(TERRAIN_LIBRARY)}"
        ) from None

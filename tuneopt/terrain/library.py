"""The built-in terrain types.

The numbers are demo parameters of our own, chosen to look like trail riding; none is a
measurement. The background roughness is ISO 8608 class B to D [?]: a measured unpaved road was
class C (Barbosa 2011), and with a bicycle's light wheel loads the linear quarter-car already
predicts a tyre-load variation near 0.9 of the static load on class D at 9 m/s (Lyapunov, see
REFERENCES.md), a front wheel skipping on every stretch. Smooth stretches are therefore B, and
the rough types get their roughness mostly from their discrete features. Friction coefficients
follow the scenario range 0.3 (wet roots, mud) to 0.8 (dry hardpack) in REFERENCES.md [?].
Speeds, feature sizes and corner sizes are common practice, no source.

jump_line is at the edge of what the simulator can ride: rolling off a table or a drop, a
passive rider lets the bike pitch nose-down in the air past the half-car's small pitch angles,
and the run ends as failed. Riders steer that with their body; the model does not.
"""

from __future__ import annotations

from types import MappingProxyType

from tuneopt.model.course import TERRAIN_NAMES
from tuneopt.terrain.parameters import (
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
        description="packed dirt with long waves and flowing corners",
        roughness=Roughness.iso_class("B"),
        speed=9.0,
        friction_dry=0.8,
        friction_wet=0.55,
        corners=Corners(gap=_S(40, 100), radius=_S(8, 20), arc=_S(8, 20), decel=_S(2.5, 4.5)),
        min_length=20.0,
    ),
    TerrainType(
        name="root_field",
        description="roots across the line as half-rounds, tight corners",
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
    ),
    TerrainType(
        name="rock_garden",
        description="square-edged rocks and ledges up and down",
        roughness=Roughness.iso_class("D"),
        speed=4.5,
        friction_dry=0.75,
        friction_wet=0.4,
        features=(
            FeatureSet(FeatureKind.ROCK, height=_S(0.05, 0.20), length=_S(0.15, 0.6),
                       gap=_S(0.3, 2.5)),
            FeatureSet(FeatureKind.STEP_UP, height=_S(0.05, 0.15), length=_S(0.1, 0.1),
                       gap=_S(3.0, 10.0)),
            FeatureSet(FeatureKind.STEP_DOWN, height=_S(0.08, 0.25), length=_S(0.1, 0.1),
                       gap=_S(3.0, 10.0)),
        ),
        corners=Corners(gap=_S(30, 80), radius=_S(5, 12), arc=_S(5, 12), decel=_S(1.5, 3.0)),
        min_length=20.0,
    ),
    TerrainType(
        name="braking_bumps",
        description="fast straights into corners with ripples dug by braking",
        roughness=Roughness.iso_class("C"),
        speed=8.0,
        friction_dry=0.65,
        friction_wet=0.45,
        corners=Corners(gap=_S(15, 40), radius=_S(4, 10), arc=_S(5, 10), decel=_S(3.0, 5.5)),
        braking_bumps=BrakingBumps(height=_S(0.03, 0.08), wavelength=_S(0.5, 1.2)),
        min_length=40.0,
    ),
    TerrainType(
        name="jump_line",
        description="table-top jumps and drops between bermed corners",
        roughness=Roughness.iso_class("B"),
        speed=8.0,
        friction_dry=0.75,
        friction_wet=0.5,
        features=(
            # small jumps and drops only: over bigger ones a real rider absorbs the lip and
            # steers the bike's pitch in the air, which the passive rider of the simulator
            # cannot (the bike over-rotates past its small-angle pitch model)
            FeatureSet(FeatureKind.JUMP, height=_S(0.3, 0.6), length=_S(1.5, 4.0),
                       gap=_S(15.0, 35.0)),
            FeatureSet(FeatureKind.DROP, height=_S(0.15, 0.35), length=_S(1.0, 2.0),
                       gap=_S(15.0, 35.0)),
        ),
        corners=Corners(gap=_S(20, 40), radius=_S(6, 12), arc=_S(8, 15), decel=_S(2.0, 4.0)),
        min_length=60.0,
    ),
    TerrainType(
        name="compression",
        description="fast dips that load the suspension deep into its travel",
        roughness=Roughness.iso_class("B"),
        speed=9.0,
        friction_dry=0.7,
        friction_wet=0.45,
        features=(
            # length at least 8 m: the dip's steepest slope pi*h/L stays under 0.32 (18 deg)
            FeatureSet(FeatureKind.COMPRESSION, height=_S(0.3, 0.8), length=_S(8.0, 16.0),
                       gap=_S(10.0, 30.0)),
        ),
        corners=Corners(gap=_S(50, 120), radius=_S(10, 25), arc=_S(8, 20), decel=_S(2.0, 4.0)),
        min_length=40.0,
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

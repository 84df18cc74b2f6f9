"""Terrain: ISO 8608 roughness, trail features, courses built from a mix, what each wheel sees."""

from tuneopt.terrain.course import LEAD_IN, Course, Segment, build_course, build_segment
from tuneopt.terrain.library import TERRAIN_LIBRARY, terrain_type
from tuneopt.terrain.measured import (
    MeasuredProfile,
    parse_profile_csv,
    read_profile_csv,
    segment_from_profile,
)
from tuneopt.terrain.parameters import (
    BrakingBumps,
    Corners,
    FeatureKind,
    FeatureSet,
    Roughness,
    Spread,
    TerrainType,
    iso_8608_class_mean,
)
from tuneopt.terrain.roughness import ROUGHNESS_BAND, band_variance, psd, synthesise_profile
from tuneopt.terrain.wheel import WheelInputs, rolling_envelope, wheel_inputs

__all__ = [
    "LEAD_IN",
    "ROUGHNESS_BAND",
    "TERRAIN_LIBRARY",
    "BrakingBumps",
    "Corners",
    "Course",
    "FeatureKind",
    "FeatureSet",
    "MeasuredProfile",
    "Roughness",
    "Segment",
    "Spread",
    "TerrainType",
    "WheelInputs",
    "band_variance",
    "build_course",
    "build_segment",
    "iso_8608_class_mean",
    "parse_profile_csv",
    "psd",
    "read_profile_csv",
    "rolling_envelope",
    "segment_from_profile",
    "synthesise_profile",
    "terrain_type",
    "wheel_inputs",
]

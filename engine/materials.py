"""A small table of common materials, each value with its source.

Values are nominal: real materials vary with frequency, temperature,
moisture and grade. A case's own ``[materials.NAME]`` table overrides an
entry of the same name. "from memory" marks values that were not looked up
in the named source when they were written here; check them against a
datasheet before an answer depends on them.

EM entries give the relative permittivity and loss tangent at about 1-10
GHz; acoustic entries the sound speed and density of a fluid.
"""

from __future__ import annotations

from .problem import Material

__all__ = ["BUILT_IN_MATERIALS", "BUILT_IN_SOURCES"]

#: name -> (material, source)
_TABLE: dict[str, tuple[Material, str]] = {
    "air_20c": (
        Material("air_20c", eps_r=1.0006, sound_speed_m_s=343.2, density_kg_m3=1.204),
        "dry air at 20 degC, 101.325 kPa: sound speed and density from the ideal-gas relations "
        "(Kinsler et al., Fundamentals of Acoustics, appendix tables; from memory); eps_r from memory",
    ),
    "fresh_water_20c": (
        Material("fresh_water_20c", sound_speed_m_s=1482.3, density_kg_m3=998.2),
        "pure water at 20 degC (sound speed: Bilaniuk and Wong 1993; density: IAPWS; both from memory); "
        "acoustic only (water is strongly dispersive at radio frequencies)",
    ),
    "sea_water_15c": (
        Material("sea_water_15c", sound_speed_m_s=1506.7, density_kg_m3=1026.0),
        "sea water at 15 degC, salinity 35, at the surface (sound speed: Mackenzie, J. Acoust. Soc. Am. 70, "
        "1981, nine-term formula; density: UNESCO EOS-80; both from memory); acoustic only",
    ),
    "ptfe": (
        Material("ptfe", eps_r=2.1, loss_tangent=0.0002),
        "PTFE at about 10 GHz (typical datasheet values, from memory)",
    ),
    "polyethylene": (
        Material("polyethylene", eps_r=2.25, loss_tangent=0.0003),
        "low-density polyethylene at about 1-10 GHz (typical datasheet values, from memory)",
    ),
    "fused_silica": (
        Material("fused_silica", eps_r=3.78, loss_tangent=0.0001),
        "fused silica at about 1-10 GHz (typical datasheet values, from memory)",
    ),
    "fr4": (
        Material("fr4", eps_r=4.4, loss_tangent=0.02),
        "FR-4 glass-epoxy laminate at about 1 GHz (typical datasheet values, from memory; grades vary 4.0-4.8)",
    ),
    "concrete_dry": (
        Material("concrete_dry", eps_r=5.3, loss_tangent=0.05),
        "dry concrete at about 1-3 GHz (from memory; moisture raises both values a lot)",
    ),
}

#: Built-in materials by name.
BUILT_IN_MATERIALS: dict[str, Material] = {name: m for name, (m, _) in _TABLE.items()}
#: Where each built-in value comes from.
BUILT_IN_SOURCES: dict[str, str] = {name: src for name, (_, src) in _TABLE.items()}

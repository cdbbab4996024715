"""Plate profiles built in code for the fleet tests (no YAML); imported by test_fleet_*.py."""

from packer.intake.profile import FilamentTime, Material, PlateProfile, PowderTime, ResinTime


def profile(technology: str, *, name: str | None = None, volume=(244.0, 198.0, 205.0),
            time=None, materials=None, spacing: float = 5.0, margin: float = 4.0) -> PlateProfile:
    time = time or {"filament": FilamentTime, "resin": ResinTime, "powder": PowderTime}[technology]()
    if materials is None:
        materials = {
            "filament": (Material("PLA", 1.24), Material("PETG", 1.27)),
            "resin": (Material("resin-grey", 1.1),),
            "powder": (Material("PA12", 1.01, 0.43),),
        }[technology]
    return PlateProfile(name=name or f"{technology}-test", file="<test>", technology=technology,
                        build_volume=tuple(volume), plate_shape="rectangle", plate_points=(),
                        keep_out=(), spacing=spacing, margin=margin, time=time,
                        materials=tuple(materials))

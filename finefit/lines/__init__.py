"""From levels to lines: wavelengths (more to come: line strengths, classification)."""

from finefit.lines.wavelengths import (
    air_to_vacuum,
    refractive_index_air,
    reported_wavelength,
    vacuum_to_air,
)

__all__ = ["air_to_vacuum", "refractive_index_air", "reported_wavelength", "vacuum_to_air"]

"""Near-field (Talbot–Lau) interferometry: Talbot coefficients, the light grating and the
fringe visibility of a symmetric three-grating interferometer (docs/visibility.md).

Plain functions of floats and arrays (:mod:`.coefficients`, :mod:`.light`), the interferometer
model on top (:mod:`.interferometer`), its contrast per velocity class for the deflection
phasor (:mod:`.contrast`) and independent wave and ray models that check it
(:mod:`.waves`).
"""

from polarbeam.beam.talbot.coefficients import (
    ABSORBED_CHOICES,
    MODELS,
    coefficient_by_quadrature,
    exp_cos_sin_coefficient,
    light_coefficient,
    light_kernel,
    material_coefficient,
    material_kernel,
    slit_coefficient,
)
from polarbeam.beam.talbot.contrast import GratingContrast, ModelContrastVelocity
from polarbeam.beam.talbot.interferometer import (
    LightGrating,
    MaterialGrating,
    TalbotLauInterferometer,
    talbot_parameter,
)
from polarbeam.beam.talbot.light import (
    absorption_cross_section,
    mean_absorbed_photons,
    peak_fluence_time_integral,
    phase_amplitude,
)
from polarbeam.beam.talbot.waves import ray_harmonics, wave_harmonics

__all__ = [
    "ABSORBED_CHOICES",
    "MODELS",
    "GratingContrast",
    "LightGrating",
    "MaterialGrating",
    "ModelContrastVelocity",
    "TalbotLauInterferometer",
    "absorption_cross_section",
    "coefficient_by_quadrature",
    "exp_cos_sin_coefficient",
    "light_coefficient",
    "light_kernel",
    "material_coefficient",
    "material_kernel",
    "mean_absorbed_photons",
    "peak_fluence_time_integral",
    "phase_amplitude",
    "ray_harmonics",
    "slit_coefficient",
    "talbot_parameter",
    "wave_harmonics",
]

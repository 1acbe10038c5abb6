"""The one caution text: written into every report (Markdown, HTML, terminal) and plan, and kept in
results.json and plan.json. It defers to local codes and licensed practice."""

from __future__ import annotations

__all__ = [
    "CAUTIONS",
    "MAGNETIC_CAUTIONS",
]


CAUTIONS = (
    "Deflector electrodes run at kilovolts: interlock the supplies, bleed and ground the "
    "electrodes before touching them, and keep the high-voltage feedthroughs guarded.",
    "Vacuum vessels and viewports store energy: use rated windows and pressure relief, and "
    "vent only through the designated valves.",
    "Hot molecular sources (ovens at several hundred kelvin and above) burn and can release "
    "toxic vapours: let them cool, and handle compounds per their safety data sheets.",
    "Lasers used for gratings or detection are typically class 3B or 4: wear the eyewear "
    "specified for the wavelength and keep beam paths enclosed.",
    "These notes do not replace local codes, the lab's safety rules and the safety officer's "
    "authority; follow licensed practice for electrical, vacuum, laser and chemical work.",
)

#: A magnetic campaign ([deflector] field = "magnetic"): the magnet in place of the electrodes.
MAGNETIC_CAUTIONS = (
    "Strong electromagnets and permanent magnets pull tools, gas bottles and implants "
    "(pacemakers, clips) with great force, and pulsed magnet currents store large energies in "
    "coils and capacitor banks: keep ferromagnetic objects and people with implants away, "
    "interlock the supplies and never open a live coil circuit.",
    *CAUTIONS[1:],
)

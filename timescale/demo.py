"""The built-in demo: an invented scenario, used by ``timescale demo``.

**Invented scenario (no real product):** a tank-level impulse sensor emits Gaussian monocycles
of 300 ps (FWHM of the parent Gaussian) and must read the echo with a 1 GS/s, 12-bit ADC whose
sampling clock has 1 ps rms jitter. The ADC's Nyquist band (500 MHz) is far below the pulse's,
so the echo must be stretched; the question is by which method and by how much. The demo also
asks for a 0.5× compression, to show each method's behaviour the other way.
"""

from __future__ import annotations

from .pulse import Pulse

__all__ = ["DESCRIPTION", "demo_pulses", "DEMO_FACTORS", "DEMO_SAMPLER_JITTER"]

DESCRIPTION = (
    "Invented scenario: a tank-level impulse sensor whose 300 ps monocycle echoes must reach "
    "a 1 GS/s ADC (1 ps rms clock jitter). Every installed method stretches the echo by 2, 4 "
    "and 8 and compresses it by 0.5."
)

#: Factors the demo compares.
DEMO_FACTORS = (0.5, 2.0, 4.0, 8.0)
#: RMS jitter of the demo's ADC clock, s.
DEMO_SAMPLER_JITTER = 1e-12


def demo_pulses() -> dict[str, Pulse]:
    """The demo's input pulses (invented): a monocycle echo and a Gaussian reference."""
    mono = Pulse.monocycle(fwhm=300e-12, center=0.8e-9, duration=4e-9, rate=40e9, name="echo monocycle")
    gauss = Pulse.gaussian(fwhm=300e-12, center=0.8e-9, duration=4e-9, rate=40e9, name="gaussian")
    return {p.name: p for p in (mono, gauss)}

"""The built-in demo: an invented scenario, used by ``timescale demo``.

**Invented scenario (no real product):** a tank-level impulse sensor emits Gaussian monocycles
of 300 ps (FWHM of the parent Gaussian) and must read the echo with a 1 GS/s, 12-bit ADC whose
sampling clock has 1 ps rms jitter. The ADC's Nyquist band (500 MHz) is far below the pulse's,
so the echo must be stretched; the question is by which method and by how much. The demo also
asks for a 0.5× compression, to show each method's behaviour the other way.

Each method runs with a few non-idealities of the kind its hardware has (invented, plausible
magnitudes: sub-picosecond clock jitter, 0.5 % mismatch, thermal noise), over 8 Monte Carlo
trials, so the comparison is not between ideal models.
"""

from __future__ import annotations

from timescale.data.pulse import Pulse

__all__ = ["DESCRIPTION", "demo_pulses", "demo_params", "DEMO_FACTORS", "DEMO_SAMPLER_JITTER",
           "DEMO_TRIALS"]

DESCRIPTION = (
    "Invented scenario: a tank-level impulse sensor whose 300 ps monocycle echoes must reach "
    "a 1 GS/s ADC (1 ps rms clock jitter). Every installed method stretches the echo by 2, 4 "
    "and 8 and compresses it by 0.5, with sub-picosecond clock jitter, 0.5 % mismatch and "
    "thermal noise where its hardware has them (8 Monte Carlo trials)."
)

#: Monte Carlo trials per cell.
DEMO_TRIALS = 8

#: Non-idealities per method (invented, plausible magnitudes); methods not installed are skipped.
_DEMO_PARAMS = {
    "resample": {"capture": True, "jitter": 0.3e-12, "oversampling": 2.5},  # bits sized for snr_target
    "switched-bandwidth": {"noise": True, "gm_mismatch": 0.005, "jitter": 0.3e-12},
    "chirp-dispersive": {"arrangement": "lens", "chirp_jitter": 0.3e-12},
    "analog-memory": {"noise": True, "aperture_jitter": 0.3e-12, "gain_mismatch": 0.005,
                      "droop_time": 1e-6, "readout": "butterworth"},
}

#: Factors the demo compares.
DEMO_FACTORS = (0.5, 2.0, 4.0, 8.0)
#: RMS jitter of the demo's ADC clock, s.
DEMO_SAMPLER_JITTER = 1e-12


def demo_params(installed) -> dict[str, dict]:
    """The demo's per-method parameters for the `installed` method names."""
    return {m: dict(p) for m, p in _DEMO_PARAMS.items() if m in set(installed)}


def demo_pulses() -> dict[str, Pulse]:
    """The demo's input pulses (invented): a monocycle echo and a Gaussian reference."""
    mono = Pulse.monocycle(fwhm=300e-12, center=0.8e-9, duration=4e-9, rate=40e9, name="echo monocycle")
    gauss = Pulse.gaussian(fwhm=300e-12, center=0.8e-9, duration=4e-9, rate=40e9, name="gaussian")
    return {p.name: p for p in (mono, gauss)}

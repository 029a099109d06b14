"""Dispersion, chirp and envelope-detection numerics shared by every method that needs them.

Sign convention (DESIGN §3): signals are written with e^{+jωt}. A dispersive element is

    H(ω) = exp(−j Φ ω² / 2),    group delay τ(ω) = −dφ/dω = Φ ω,

so Φ (s²) is the group-delay dispersion (GDD); the delay slope in s/Hz is 2πΦ. A linear chirp
whose instantaneous frequency rises at μ Hz/s has the phase (t − t_c)²/(2Φ) with Φ = 1/(2πμ):
it is what an impulse becomes after a line of GDD Φ.

Waveforms travel as :class:`Wave` records: either a *real passband* record (``carrier=None``)
or the *complex envelope* v(t) of a band-pass signal about a carrier f_c, the real signal being
Re{v(t)·e^{j2πf_c t}}. A line is evaluated at the absolute angular frequency in both cases, so
the same line model serves both paths; :func:`choose_path` picks one from the
carrier-to-bandwidth ratio.

Every operator is applied by FFT on a record padded by the spread of group delays over the
occupied band (plus a guard), so the output grows to hold the dispersed pulse and never wraps
around; FFT sizes come from :func:`scipy.fft.next_fast_len`.

Line models (all frozen dataclasses with ``response(omega)`` and ``group_delay(omega)`` taking
absolute angular frequencies ω ≥ 0 in rad/s):

* :class:`QuadraticLine` — ideal quadratic phase about a centre frequency, optional bulk delay
  and a sinusoidal group-delay ripple.
* :class:`BandLimitedLine` — the same phase, a finite pass band (Butterworth-shaped edges) and an
  insertion loss proportional to the group delay (dB per second of delay).
* :class:`AllpassLine` — a cascade of first- and second-order all-pass sections, optionally with
  the loss that finite-Q reactances add; :func:`design_allpass` fits one to a linear group
  delay over a band and reports its real ripple.
* :class:`SampledLine` — a response sampled on a frequency grid (measured or simulated), e.g.
  read from a Touchstone file by :func:`read_touchstone`; :meth:`SampledLine.with_dc` adds a DC
  point, :meth:`SampledLine.causality` checks the impulse response for precursors and
  :func:`fit_gdd` fits Φ to its group delay.

Modules: ``waves`` (Wave, chirp/GDD conversions, path choice), ``lines`` (analytic line models,
all-pass placement and design), ``networks`` (element values of all-pass sections: lattice and
bridged-T), ``measured`` (sampled and Touchstone lines, causality, GDD fit),
``operators`` (applying lines, dispersion, the time lens, the stretch penalty), ``detectors``
(envelope detection). Imports only numpy, scipy, :mod:`timescale.data` and
:mod:`timescale.data.signal`.
"""

from timescale.numerics.dispersion.detectors import envelope, lowpass, square_law
from timescale.numerics.dispersion.lines import (
                    AllpassFit,
                    AllpassLine,
                    BandLimitedLine,
                    QuadraticLine,
                    allpass1_delay,
                    allpass2_delay,
                    allpass_placement,
                    allpass_section_count,
                    design_allpass,
)
from timescale.numerics.dispersion.networks import AllpassElements, allpass_elements, lattice_arms
from timescale.numerics.dispersion.measured import (
                    Causality,
                    SampledLine,
                    fit_gdd,
                    read_touchstone,
)
from timescale.numerics.dispersion.operators import (
                    apply_line,
                    apply_response,
                    disperse,
                    dispersion_penalty,
                    penalty_null,
                    time_lens,
)
from timescale.numerics.dispersion.waves import (
                    Wave,
                    chirp_rate_from_gdd,
                    choose_path,
                    gdd_from_chirp_rate,
                    group_delay_of,
                    linear_chirp,
                    phase_from_group_delay,
                    quadratic_phase,
)

__all__ = [
    "Wave",
    "gdd_from_chirp_rate",
    "chirp_rate_from_gdd",
    "quadratic_phase",
    "phase_from_group_delay",
    "group_delay_of",
    "linear_chirp",
    "choose_path",
    "QuadraticLine",
    "BandLimitedLine",
    "AllpassLine",
    "SampledLine",
    "AllpassFit",
    "allpass1_delay",
    "allpass2_delay",
    "allpass_section_count",
    "allpass_placement",
    "AllpassElements",
    "allpass_elements",
    "lattice_arms",
    "design_allpass",
    "fit_gdd",
    "read_touchstone",
    "Causality",
    "apply_line",
    "apply_response",
    "disperse",
    "time_lens",
    "envelope",
    "lowpass",
    "square_law",
    "dispersion_penalty",
    "penalty_null",
]

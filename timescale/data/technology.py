"""Technology: the process constants that cost and noise models use.

Values are SI. The presets shipped with timescale are **invented, typical-order values for
illustration**; they describe no real foundry process. For a real design, write a TOML card with
your process's numbers::

    name = "my-process"
    description = "..."
    base = "example-balanced"      # optional: start from a preset, override what follows
    cap_density = 2.0e-3           # F/m²
    gm_over_id = 15.0              # S/A

and load it with :meth:`Technology.from_toml`.
"""

from __future__ import annotations

import dataclasses
import json
from dataclasses import dataclass, fields

from timescale.data.checks import read_toml
from timescale.data.errors import closest

__all__ = ["Technology", "PRESETS", "preset", "DEFAULT_TECHNOLOGY", "CORNERS"]

#: Process corners a card can describe.
CORNERS = ("typical", "slow", "fast")
#: Fields where 0 is meaningful (no spread, no temperature dependence, an ideal clock or detector).
_ZERO_ALLOWED = ("gm_spread", "cap_spread", "gm_temperature_exponent", "adc_jitter", "detector_noise_density")


def _f(units: str, doc: str):
    return dataclasses.field(metadata={"units": units, "doc": doc})


@dataclass(frozen=True, kw_only=True)
class Technology:
    """Process constants (every numeric field in SI; see each field's ``units`` metadata)."""

    name: str = _f("", "card name")
    description: str = _f("", "what the card describes and where its numbers come from")
    temperature: float = _f("K", "operating temperature for thermal noise")
    supply: float = _f("V", "analog supply voltage")
    cap_density: float = _f("F/m²", "capacitance per area of the densest linear capacitor")
    gm_over_id: float = _f("S/A", "transconductor efficiency gm/I_D at the chosen bias")
    gm_intrinsic_gain: float = _f("", "transconductor gm·r_o (finite output conductance)")
    gm_noise_gamma: float = _f("", "excess noise factor γ in 4kTγ·gm")
    gm_linear_range: float = _f("V", "peak differential input a transconductor handles at the "
                                "distortion a 40 dB signal-to-noise target allows (sets a gm-C "
                                "filter's internal signal swing)")
    gm_cell_area: float = _f("m²", "area of one transconductor cell")
    gm_max: float = _f("S", "largest practical transconductance of one cell")
    inductor_track_width: float = _f("m", "spiral inductor track width")
    inductor_track_spacing: float = _f("m", "spiral inductor track spacing")
    inductor_q: float = _f("", "quality factor of on-chip spiral inductors near 5 GHz")
    adc_fom: float = _f("J", "ADC Walden figure of merit, energy per conversion step")
    adc_area_per_rate: float = _f("m²·s", "ADC area per sample rate (area = this × f_s)")
    dac_fom: float = _f("J", "DAC energy per conversion step (Walden form)")
    memory_energy_per_bit: float = _f("J", "energy to write and read one stored bit")
    memory_area_per_bit: float = _f("m²", "area of one stored bit")
    mixer_power: float = _f("W", "power of one active mixer")
    mixer_area: float = _f("m²", "area of one active mixer")
    chirp_source_power: float = _f("W", "power of a chirped-carrier source")
    chirp_source_area: float = _f("m²", "area of a chirped-carrier source")
    detector_power: float = _f("W", "power of an envelope detector")
    detector_area: float = _f("m²", "area of an envelope detector")
    switch_area: float = _f("m²", "area of one sampling switch with its driver")
    # -- process limits and spreads (what feasibility, corners and calibrated costs need) --
    f_t: float = _f("Hz", "transit frequency f_T of the transconductor devices at the chosen gm/I_D")
    gm_parasitic_cap: float = _f("F/S", "a gm cell's own capacitance per siemens of gm (devices and "
                                 "wiring); its pole gm/(2π·C) bounds the highest usable filter pole")
    layout_overhead: float = _f("", "active area over the summed area of devices, capacitors and "
                                "spirals (wiring, bias, decoupling, switch drivers)")
    die_area: float = _f("m²", "largest single die a design may occupy")
    adc_corner_rate: float = _f("Hz", "sample rate above which the ADC figure of merit worsens 10 dB "
                                "per decade (survey frontier); adc_fom holds below it")
    adc_max_rate: float = _f("Hz", "highest sample rate of one ADC channel on this card")
    adc_jitter: float = _f("s", "rms aperture jitter of the best sampling clock on this card")
    vco_fom: float = _f("dB", "oscillator phase-noise figure of merit "
                        "-L(Δf) + 20·log10(f0/Δf) - 10·log10(P/1 mW)")
    chirp_max_fractional_span: float = _f("", "widest chirp span one source covers, as a fraction "
                                          "of its carrier")
    carrier_max_fraction: float = _f("", "highest carrier or LO frequency, as a fraction of f_T")
    mixer_noise_figure: float = _f("dB", "single-sideband noise figure of one active mixer")
    detector_noise_density: float = _f("V/√Hz", "input-referred noise density of an envelope detector")
    inductor_substrate_cap: float = _f("F/m²", "capacitance per area of spiral track to the substrate "
                                       "(with the track area, sets a spiral's self-resonance)")
    gm_spread: float = _f("", "relative gm change at the process corners: slow x(1 - s), fast x(1 + s)")
    cap_spread: float = _f("", "relative capacitance change at the corners: slow x(1 + s), fast x(1 - s)")
    temperature_nominal: float = _f("K", "temperature at which the hardware is sized")
    temperature_min: float = _f("K", "lowest operating temperature the card covers")
    temperature_max: float = _f("K", "highest operating temperature the card covers")
    gm_temperature_exponent: float = _f("", "x in gm ∝ (T/T_nominal)^-x at a fixed bias current")
    corner: str = _f("", "process corner this card describes: typical, slow or fast")

    def __post_init__(self):
        for f in fields(self):
            value = getattr(self, f.name)
            if f.type in ("str", str):
                if not isinstance(value, str):
                    raise TypeError(f"technology field {f.name!r} must be a string, got {value!r}")
                continue
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise TypeError(
                    f"technology field {f.name!r} must be a number in {f.metadata['units'] or 'no unit'}, "
                    f"got {value!r} ({type(value).__name__})"
                )
            zero_ok = f.name in _ZERO_ALLOWED
            if value != value or value == float("inf") or not (value >= 0 if zero_ok else value > 0):
                raise ValueError(
                    f"technology field {f.name!r} must be finite and {'>= 0' if zero_ok else '> 0'} "
                    f"({f.metadata['units'] or 'no unit'}), got {value!r}"
                )
            object.__setattr__(self, f.name, float(value))
        if self.corner not in CORNERS:
            raise ValueError(f"technology field 'corner' must be one of {', '.join(CORNERS)}, got {self.corner!r}")
        if not self.temperature_min <= self.temperature_nominal <= self.temperature_max:
            raise ValueError(
                f"technology temperatures must satisfy temperature_min <= temperature_nominal <= "
                f"temperature_max, got {self.temperature_min:g} K, {self.temperature_nominal:g} K, "
                f"{self.temperature_max:g} K")
        for name in ("gm_spread", "cap_spread"):
            if getattr(self, name) >= 1:
                raise ValueError(f"technology field {name!r} must be < 1 (a relative change), "
                                 f"got {getattr(self, name)!r}")

    # -- corners and temperature ------------------------------------------------------------
    def at_corner(self, corner: str = "typical", temperature: float | None = None) -> "Technology":
        """Return this card at a process corner and an operating temperature.

        Parameters
        ----------
        corner : {"typical", "slow", "fast"}
            Process corner; its gm and capacitance factors are :attr:`gm_factor` and
            :attr:`cap_factor` of the returned card.
        temperature : float, optional
            Operating temperature, K, within [temperature_min, temperature_max] (default: keep
            this card's ``temperature``).
        """
        if corner not in CORNERS:
            raise ValueError(f"corner must be one of {', '.join(CORNERS)}, got {corner!r}{closest(str(corner), CORNERS)}")
        t = self.temperature if temperature is None else temperature
        if isinstance(t, bool) or not isinstance(t, (int, float)) or not (
                self.temperature_min <= t <= self.temperature_max):
            raise ValueError(
                f"temperature must be a number of kelvin within this card's range "
                f"[{self.temperature_min:g}, {self.temperature_max:g}] K, got {t!r}")
        return dataclasses.replace(self, corner=corner, temperature=float(t))

    @property
    def gm_factor(self) -> float:
        """Transconductance at this corner and temperature over its typical, nominal-temperature
        value (the same bias current): (1 ± gm_spread)·(T/T_nominal)^(−gm_temperature_exponent)."""
        sign = {"typical": 0.0, "slow": -1.0, "fast": 1.0}[self.corner]
        return (1.0 + sign * self.gm_spread) * (self.temperature / self.temperature_nominal) ** (
            -self.gm_temperature_exponent)

    @property
    def cap_factor(self) -> float:
        """Capacitance at this corner over its typical value: slow (1 + cap_spread), fast
        (1 − cap_spread)."""
        sign = {"typical": 0.0, "slow": 1.0, "fast": -1.0}[self.corner]
        return 1.0 + sign * self.cap_spread

    @classmethod
    def field_units(cls) -> dict[str, str]:
        """Return ``{field: unit}`` for every field."""
        return {f.name: f.metadata["units"] for f in fields(cls)}

    def as_dict(self) -> dict:
        """The card as a plain dict."""
        return dataclasses.asdict(self)

    def to_json(self) -> str:
        """The card as a JSON string (for cube provenance)."""
        return json.dumps(self.as_dict(), sort_keys=True)

    def replace(self, **changes) -> "Technology":
        """Return a copy with some fields changed (checked like a loaded card)."""
        _check_keys(changes, "replace()")
        return dataclasses.replace(self, **changes)

    @classmethod
    def from_dict(cls, data: dict, *, where: str = "technology") -> "Technology":
        """Build a card from a mapping; ``base`` names a preset to start from.

        Raises
        ------
        ValueError
            For an unknown key (with the closest valid one), a missing field, or an unknown
            base preset.
        """
        data = dict(data)
        base = data.pop("base", None)
        _check_keys(data, where)
        if base is not None:
            if base not in PRESETS:
                raise ValueError(
                    f"{where}: base = {base!r} is not a preset{closest(base, PRESETS)}; "
                    f"presets: {', '.join(PRESETS)}"
                )
            merged = PRESETS[base].as_dict()
            merged.update(data)
            data = merged
        missing = [f.name for f in fields(cls) if f.name not in data]
        if missing:
            raise ValueError(
                f"{where}: missing field(s) {', '.join(missing)}; give them or set "
                f"base = one of {', '.join(PRESETS)}"
            )
        return cls(**data)

    @classmethod
    def from_toml(cls, path) -> "Technology":
        """Load a card from a TOML file (see the module docstring for the form)."""
        data = read_toml(path, "technology file")
        return cls.from_dict(data, where=f"technology file {str(path)!r}")


def _check_keys(data, where):
    valid = {f.name for f in fields(Technology)}
    for key in data:
        if key not in valid:
            raise ValueError(
                f"{where}: unknown field {key!r}{closest(key, valid)}; valid fields: "
                f"{', '.join(sorted(valid))}"
            )


_INVENTED = "Invented, typical-order values for illustration only; not a real process."

PRESETS: dict[str, Technology] = {
    "example-balanced": Technology(
        name="example-balanced",
        description="A mid-range CMOS-like card. " + _INVENTED,
        temperature=300.0,
        supply=1.2,
        cap_density=2.0e-3,  # 2 fF/µm²
        gm_over_id=12.0,
        gm_intrinsic_gain=30.0,
        gm_noise_gamma=1.0,
        gm_linear_range=0.2,  # 0.4 V peak-to-peak differential at a 1.2 V supply
        gm_cell_area=400e-12,  # 400 µm²
        gm_max=50e-3,
        inductor_track_width=8e-6,
        inductor_track_spacing=2e-6,
        inductor_q=10.0,
        adc_fom=50e-15,
        adc_area_per_rate=0.05e-6 / 1e9,  # 0.05 mm² per GS/s
        dac_fom=20e-15,
        memory_energy_per_bit=10e-15,
        memory_area_per_bit=0.5e-12,
        mixer_power=10e-3,
        mixer_area=0.02e-6,
        chirp_source_power=20e-3,
        chirp_source_area=0.1e-6,
        detector_power=2e-3,
        detector_area=0.005e-6,
        switch_area=20e-12,
        f_t=60e9,
        gm_parasitic_cap=6e-12,  # 6 fF/mS: own pole 26.5 GHz
        layout_overhead=2.5,  # common practice, no source
        die_area=25e-6,  # a 5 mm x 5 mm die
        # Walden-form frontier of low-resolution (6-8 bit) converters: flat to about 1 GS/s on a
        # mid-range node (from memory). The survey's Schreier envelope bends near 50 MHz because
        # its best designs are high-resolution, noise-limited ones; that corner is not this one.
        adc_corner_rate=1e9,
        adc_max_rate=10e9,
        adc_jitter=100e-15,
        vco_fom=180.0,
        chirp_max_fractional_span=0.2,
        carrier_max_fraction=0.3,
        mixer_noise_figure=12.0,
        detector_noise_density=10e-9,
        inductor_substrate_cap=6.9e-6,  # ε_ox/t_ox for 5 µm of oxide
        gm_spread=0.15,
        cap_spread=0.10,
        temperature_nominal=300.0,
        temperature_min=233.15,  # -40 °C
        temperature_max=358.15,  # 85 °C
        gm_temperature_exponent=1.0,
        corner="typical",
    ),
}
PRESETS["example-fast"] = dataclasses.replace(
    PRESETS["example-balanced"],
    name="example-fast",
    description="A fine-line, fast, low-voltage card. " + _INVENTED,
    supply=0.9,
    cap_density=4.0e-3,
    gm_over_id=15.0,
    gm_intrinsic_gain=15.0,
    gm_linear_range=0.15,  # lower supply, less headroom
    gm_cell_area=150e-12,
    gm_max=100e-3,
    inductor_track_width=6e-6,
    inductor_track_spacing=2e-6,
    adc_fom=10e-15,
    adc_area_per_rate=0.02e-6 / 1e9,
    dac_fom=8e-15,
    memory_energy_per_bit=3e-15,
    memory_area_per_bit=0.15e-12,
    f_t=150e9,
    gm_parasitic_cap=2.5e-12,
    adc_corner_rate=3e9,
    adc_max_rate=30e9,
    adc_jitter=60e-15,
    vco_fom=185.0,
)
PRESETS["example-coarse"] = dataclasses.replace(
    PRESETS["example-balanced"],
    name="example-coarse",
    description="An older, higher-voltage card with good matching and slow devices. " + _INVENTED,
    supply=3.3,
    cap_density=1.0e-3,
    gm_over_id=8.0,
    gm_intrinsic_gain=60.0,
    gm_linear_range=0.5,  # 3.3 V supply
    gm_cell_area=1500e-12,
    gm_max=20e-3,
    inductor_track_width=10e-6,
    inductor_track_spacing=3e-6,
    inductor_q=8.0,
    adc_fom=300e-15,
    adc_area_per_rate=0.3e-6 / 1e9,
    dac_fom=100e-15,
    memory_energy_per_bit=50e-15,
    memory_area_per_bit=3e-12,
    f_t=15e9,
    gm_parasitic_cap=25e-12,
    adc_corner_rate=50e6,
    adc_max_rate=1e9,
    adc_jitter=500e-15,
    vco_fom=175.0,
    gm_spread=0.10,
    cap_spread=0.05,
)
PRESETS["example-cmos130"] = dataclasses.replace(
    PRESETS["example-balanced"],
    name="example-cmos130",
    description=(
        "A generic 130 nm-class CMOS card with typical published-order values: 1.2 V core, "
        "1.5 fF/µm² MIM capacitors, f_T ≈ 40 GHz at moderate inversion, thick-metal spirals of "
        "Q ≈ 10, ADCs of the 130 nm generation (a few hundred fJ per step, about 2 GS/s per "
        "channel). " + _INVENTED),
    supply=1.2,
    cap_density=1.5e-3,  # 1.5 fF/µm² MIM (1-2 fF/µm² is the published range for this class)
    gm_over_id=12.0,  # moderate inversion
    gm_intrinsic_gain=20.0,
    gm_noise_gamma=1.0,
    # a 3rd-order 120 nm gm-C low-pass reaches HD3 = -49 dB at 400 mV peak-to-peak
    # (published; see docs/theory/switched-bandwidth.md): 0.2 V peak differential
    gm_linear_range=0.2,
    gm_cell_area=1500e-12,
    gm_max=20e-3,
    inductor_track_width=8e-6,
    inductor_track_spacing=2e-6,
    inductor_q=10.0,
    adc_fom=250e-15,
    adc_area_per_rate=0.2e-6 / 1e9,
    dac_fom=50e-15,
    memory_energy_per_bit=20e-15,
    memory_area_per_bit=3.5e-12,
    mixer_power=10e-3,
    mixer_area=0.03e-6,
    chirp_source_power=20e-3,
    chirp_source_area=0.15e-6,
    detector_power=2e-3,
    detector_area=0.01e-6,
    switch_area=30e-12,
    f_t=40e9,
    gm_parasitic_cap=10e-12,  # 2.5 x C_gg/gm = 2.5/(2π·40 GHz): own pole ≈ 16 GHz
    adc_corner_rate=500e6,
    adc_max_rate=2.5e9,
    adc_jitter=200e-15,
    vco_fom=180.0,
    chirp_max_fractional_span=0.25,
    carrier_max_fraction=0.3,
    mixer_noise_figure=12.0,
    detector_noise_density=20e-9,
    inductor_substrate_cap=6.9e-6,
    gm_spread=0.15,
    cap_spread=0.10,
    temperature_min=233.15,
    temperature_max=398.15,  # -40 °C to 125 °C
)

DEFAULT_TECHNOLOGY = PRESETS["example-balanced"]


def preset(name: str) -> Technology:
    """Return a shipped preset card by name."""
    if name not in PRESETS:
        raise ValueError(f"technology {name!r} is not a preset{closest(name, PRESETS)}; presets: {', '.join(PRESETS)}")
    return PRESETS[name]

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

__all__ = ["Technology", "PRESETS", "preset", "DEFAULT_TECHNOLOGY"]


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
            if not value > 0 or value != value or value == float("inf"):
                raise ValueError(
                    f"technology field {f.name!r} must be finite and > 0 "
                    f"({f.metadata['units'] or 'no unit'}), got {value!r}"
                )
            object.__setattr__(self, f.name, float(value))

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
    gm_cell_area=150e-12,
    gm_max=100e-3,
    inductor_track_width=6e-6,
    inductor_track_spacing=2e-6,
    adc_fom=10e-15,
    adc_area_per_rate=0.02e-6 / 1e9,
    dac_fom=8e-15,
    memory_energy_per_bit=3e-15,
    memory_area_per_bit=0.15e-12,
)
PRESETS["example-coarse"] = dataclasses.replace(
    PRESETS["example-balanced"],
    name="example-coarse",
    description="An older, higher-voltage card with good matching and slow devices. " + _INVENTED,
    supply=3.3,
    cap_density=1.0e-3,
    gm_over_id=8.0,
    gm_intrinsic_gain=60.0,
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
)

DEFAULT_TECHNOLOGY = PRESETS["example-balanced"]


def preset(name: str) -> Technology:
    """Return a shipped preset card by name."""
    if name not in PRESETS:
        raise ValueError(f"technology {name!r} is not a preset{closest(name, PRESETS)}; presets: {', '.join(PRESETS)}")
    return PRESETS[name]

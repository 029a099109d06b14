"""Technology cards: presets, TOML loading and its errors."""

import pytest

from timescale import PRESETS, Technology, preset


def test_presets_are_labelled_invented():
    assert len(PRESETS) >= 2
    for card in PRESETS.values():
        assert "Invented" in card.description


def test_toml_with_base_and_overrides(tmp_path):
    f = tmp_path / "card.toml"
    f.write_text('name = "mine"\ndescription = "test card"\nbase = "example-fast"\ncap_density = 5e-3\n')
    t = Technology.from_toml(f)
    assert t.cap_density == 5e-3 and t.supply == preset("example-fast").supply


def test_unknown_key_suggests(tmp_path):
    f = tmp_path / "card.toml"
    f.write_text('base = "example-fast"\ncap_densty = 5e-3\n')
    with pytest.raises(ValueError, match="unknown field 'cap_densty' \\(did you mean 'cap_density'\\?\\)"):
        Technology.from_toml(f)


def test_missing_and_mistyped_fields(tmp_path):
    f = tmp_path / "card.toml"
    f.write_text('name = "x"\ndescription = "y"\nsupply = 1.0\n')
    with pytest.raises(ValueError, match="missing field"):
        Technology.from_toml(f)
    f.write_text('base = "example-fast"\nsupply = "1.2 V"\n')
    with pytest.raises(TypeError, match="'supply' must be a number in V"):
        Technology.from_toml(f)
    f.write_text('base = "example-fast"\nsupply = -1.2\n')
    with pytest.raises(ValueError, match="'supply' must be finite and > 0"):
        Technology.from_toml(f)
    f.write_text('base = "nope"\n')
    with pytest.raises(ValueError, match="not a preset"):
        Technology.from_toml(f)
    with pytest.raises(ValueError, match="does not exist"):
        Technology.from_toml(tmp_path / "absent.toml")


def test_every_field_has_units():
    units = Technology.field_units()
    assert units["cap_density"] == "F/m²" and units["temperature"] == "K"

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


def test_corners_and_temperature_scale_gm_and_capacitance():
    card = preset("example-cmos130")
    assert card.corner == "typical" and card.gm_factor == 1.0 and card.cap_factor == 1.0
    slow = card.at_corner("slow")
    assert slow.gm_factor == pytest.approx(1 - card.gm_spread)
    assert slow.cap_factor == pytest.approx(1 + card.cap_spread)
    fast = card.at_corner("fast")
    assert fast.gm_factor == pytest.approx(1 + card.gm_spread) and fast.cap_factor == pytest.approx(1 - card.cap_spread)
    # gm ∝ (T/T_nom)^-x at a fixed bias: 125 °C against 300 K with x = 1 (by the card's own law)
    hot = card.at_corner("typical", 398.15)
    assert hot.gm_factor == pytest.approx(300.0 / 398.15) and hot.temperature == 398.15
    with pytest.raises(ValueError, match="corner must be one of typical, slow, fast"):
        card.at_corner("slwo")
    with pytest.raises(ValueError, match=r"within this card's range \[233.15, 398.15\] K, got -10"):
        card.at_corner("slow", -10.0)


def test_new_fields_refuse_nonsense_and_old_cards_with_base_still_load(tmp_path):
    card = preset("example-balanced")
    with pytest.raises(ValueError, match="'gm_parasitic_cap' must be finite and > 0"):
        card.replace(gm_parasitic_cap=0.0)
    assert card.replace(gm_spread=0.0).gm_spread == 0.0  # no spread is meaningful
    with pytest.raises(ValueError, match="'gm_spread' must be < 1"):
        card.replace(gm_spread=1.5)
    with pytest.raises(ValueError, match="temperature_min <= temperature_nominal"):
        card.replace(temperature_min=310.0)
    with pytest.raises(ValueError, match="'corner' must be one of typical, slow, fast"):
        card.replace(corner="hot")
    f = tmp_path / "old.toml"  # a 0.1 card: only the old fields, on a base preset
    f.write_text('name = "old"\ndescription = "0.1 card"\nbase = "example-balanced"\nadc_fom = 40e-15\n')
    old = Technology.from_toml(f)
    assert old.adc_fom == 40e-15 and old.f_t == card.f_t

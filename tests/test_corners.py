"""Process corners and temperature as suite dimensions: each cell sized on the typical card at
its nominal temperature, evaluated (simulated, billed, checked) at the corner."""

import numpy as np
import pytest

import timescale as ts
from timescale.data.technology import preset
from timescale.runner.suite import Suite

X = ts.Pulse.gaussian(fwhm=0.8e-9, center=2.0e-9, duration=8e-9, rate=20e9, name="g")
CARD = preset("example-cmos130")


def test_corner_and_temperature_dims_show_the_spread_of_one_design():
    suite = Suite(pulses=[X], methods=["switched-bandwidth"], factors=[1.8], seed=1,
                  technology="example-cmos130",
                  sweep={"corner": ["typical", "slow", "fast"], "temperature": [300.0, 398.15]})
    ds = ts.run_suite(suite, progress=False).cube
    assert ds["corner"].attrs["long_name"] and ds["temperature"].attrs["units"] == "K"
    delay = ds["delay"].sel(method_name="switched-bandwidth", pulse="g", factor=1.8)
    typ = float(delay.sel(corner="typical", temperature=300.0))
    # one design (sized at typical, 300 K): its delay follows C/gm on each card (the card's
    # own corner and temperature laws)
    for corner in ("slow", "fast"):
        for t in (300.0, 398.15):
            card = CARD.at_corner(corner, t)
            assert float(delay.sel(corner=corner, temperature=t)) == pytest.approx(
                typ * card.cap_factor / card.gm_factor, rel=1e-9)
    # the same bill at every corner (bias currents and areas are fixed at design)
    power = ds["power"].values.ravel()
    assert np.allclose(power, power[0])
    # and the fidelity moves: the switch instant was placed for the typical delay
    nr = ds["nrmse"].sel(temperature=300.0).values.ravel()
    assert np.ptp(nr) > 0.005
    assert set(ds["status"].values.ravel()) <= {"ok", "warned", "infeasible"}


def test_without_corner_dims_the_card_is_used_as_given():
    slow = CARD.at_corner("slow")
    a = ts.compare(X, ["switched-bandwidth"], [1.8], technology=slow, seed=1)
    oc = ts.stretch(X, "switched-bandwidth", 1.8, technology=slow, seed=1)
    assert float(a["delay"].squeeze()) == pytest.approx(oc.design.delay, rel=1e-12)


@pytest.mark.parametrize("sweep, match", [
    ({"corner": ["typical", "slwo"]}, r"sweep\.corner\[1\] = 'slwo' is not valid: corner must be one of "
                                      r"typical, slow, fast, got 'slwo' \(did you mean 'slow'\?\)"),
    ({"temperature": [300.0, 500.0]}, r"sweep\.temperature\[1\] = 500\.0 is not valid: temperature must "
                                      r"be a number of kelvin within this card's range \[233\.15, 398\.15\] K"),
    ({"temperature": [-10.0]}, r"sweep\.temperature\[0\] = -10\.0 is not valid"),
    ({"temperature": ["hot"]}, r"sweep\.temperature\[0\] = 'hot' is not valid"),
])
def test_bad_corners_and_temperatures_are_refused_naming_the_key(sweep, match):
    with pytest.raises(ValueError, match=match):
        Suite(pulses=[X], methods=["switched-bandwidth"], technology="example-cmos130", sweep=sweep).plan()


def test_suite_file_sweeps_corners(tmp_path):
    f = tmp_path / "s.toml"
    f.write_text('methods = ["resample"]\nfactors = [2.0]\ntechnology = "example-cmos130"\n'
                 '[sweep]\ncorner = ["slow", "fast"]\n'
                 '[[pulses]]\nshape = "gaussian"\nfwhm = 300e-12\ncenter = 0.8e-9\nduration = 4e-9\n'
                 'rate = 40e9\n')
    plan = Suite.from_toml(f).plan()
    assert [a.name for a in plan.axes()][-1] == "corner" and plan.n_cells == 2
    spec = plan.cell(1, 0)
    sized, evaluated = spec.cards()
    assert (sized.corner, evaluated.corner) == ("typical", "fast")
    assert sized.temperature == CARD.temperature_nominal
    f.write_text(f.read_text().replace('corner = ["slow", "fast"]', 'corner = ["typ"]'))
    with pytest.raises(ValueError, match=r"sweep\.corner\[0\] = 'typ' is not valid"):
        Suite.from_toml(f)

"""switched-bandwidth sizing: the noise target, the choice of structure, the passive banks, the
process limits and the response to another card (corners, temperature)."""

import math

import numpy as np
import pytest

import timescale as ts
from timescale.data.technology import preset
from timescale_builtins.switched_bandwidth import SwitchedBandwidth

X = ts.Pulse.gaussian(fwhm=0.8e-9, center=2.0e-9, duration=8e-9, rate=20e9, name="g")
CARD = preset("example-cmos130")


def _stretch(factor=1.8, technology=CARD, **kw):
    return ts.stretch(X, "switched-bandwidth", factor, technology=technology, **kw)


@pytest.mark.parametrize("kw, snr", [
    ({}, 40.0),  # the shared default
    ({"snr_target": 50.0}, 50.0),
    # an 8-bit ADC filled by the output peak: its noise FS/(2^8·√3) against the peak,
    # 20·log10(2^8·√3) = 52.93 dB (quantization noise LSB/√12 of a 2·FS range; standard result)
    ({"adc_enob": 8.0}, 20 * math.log10(2 ** 8 * math.sqrt(3))),
    # the same ADC at twice the peak's full scale is 6.02 dB noisier against the pulse
    ({"adc_enob": 8.0, "adc_full_scale": 2.0}, 20 * math.log10(2 ** 7 * math.sqrt(3))),
    # an ADC coarser than the target does not lower it
    ({"adc_enob": 4.0}, 40.0),
])
def test_noise_is_sized_for_the_snr_target_and_the_adc(kw, snr):
    oc = _stretch(**kw)
    d = oc.design
    assert d.snr_required == pytest.approx(snr, abs=1e-9)
    # the exact output noise (Lyapunov/Van Loan through the switch) meets it at the output peak
    assert oc.metrics["snr_db"].value[0] == pytest.approx(snr, abs=0.3)
    assert d.swing == CARD.gm_linear_range  # a 1 V pulse is scaled into the cells' linear range


def test_more_snr_costs_power_as_the_square_of_the_noise():
    # kT/C sizing: every capacitance and gm grows as 1/v_n², so 10 dB more SNR is 10× the gm
    # (the floors — the least node capacitance and the cells' own — hold only at low SNR)
    lo, hi = _stretch(prototype="ladder", snr_target=50.0), _stretch(prototype="ladder", snr_target=60.0)
    assert hi.bill.power / lo.bill.power == pytest.approx(10.0, rel=0.02)


def test_sizing_keeps_the_cheaper_structure_that_the_card_can_build_and_says_so():
    oc = _stretch(1 / 1.7)
    d = oc.design
    assert set(d.candidates) == {"Padé cascade", "ladder line"}
    buildable = {k: v for k, v in d.candidates.items() if v["limit_margin"] >= 1 and v["targets_met"]}
    assert buildable, d.candidates
    chosen = min(buildable, key=lambda k: buildable[k]["power"])
    assert d.structure == chosen and oc.bill.power == pytest.approx(buildable[chosen]["power"])
    assert any(n.startswith(f"chose the {chosen}") for n in d.notes)
    assert oc.metrics["ladder_line"].value == float(d.prototype == "ladder")
    # the Padé cascade's summers (≈ 7× the section ω0 so that K of them droop < 2 %) are too
    # fast for this card's cells when compressing: it is not buildable here
    assert d.candidates["Padé cascade"]["limit_margin"] < 1


def test_passive_banks_share_charge_and_flux():
    # adding elements divides every state by α (charge and flux conserved): the stretched
    # output has 1/α of the gain the same line gives at α = 1 (its spiral loss is the same: the
    # loss rate falls by α as the playback lengthens by α); removing elements keeps the gain
    same = _stretch(1.0, realization="lc")
    up = _stretch(2.0, realization="lc")
    down = _stretch(0.5, realization="lc")
    g = {k: ts.metrics.fit_reference(o.pulse, X, o.factor).gain[0] for k, o in
         (("same", same), ("up", up), ("down", down))}
    assert g["same"] < 1  # the spirals' series resistance (card's Q) loses signal
    assert g["up"] / g["same"] == pytest.approx(0.5, rel=0.03)
    assert g["down"] / g["same"] == pytest.approx(1.0, rel=0.03)
    assert up.metrics["switch_gain"].value == 0.5 and up.metrics["switch_energy_loss"].value == 0.5
    assert down.metrics["switch_energy_loss"].value == pytest.approx(0.5)
    for o in (up, down):
        assert ts.metrics.achieved_factor(o.pulse, X)[0] == pytest.approx(o.factor, rel=0.05)
    # the bill: tapped spirals of max(1, α)·L, no supply power
    assert up.bill.power == 0.0 and up.bill.area > same.bill.area
    with pytest.raises(ValueError, match="passive realization is a ladder line"):
        _stretch(realization="lc", prototype="pade")


def test_limits_name_what_the_card_cannot_build():
    # the gm cell's own pole: a 4× faster pulse on the slow card puts the filter's poles above it
    fast_pulse = ts.Pulse.gaussian(fwhm=0.2e-9, center=0.6e-9, duration=2.5e-9, rate=80e9)
    oc = ts.stretch(fast_pulse, "switched-bandwidth", 2.0, technology=preset("example-coarse"))
    unmet = {lim.name for lim in oc.limits if not lim.met}
    assert not oc.feasible and unmet & {"highest filter pole", "gm cells' own capacitance"}
    pole = next(lim for lim in oc.limits if lim.name == "highest filter pole")
    assert pole.allowed == pytest.approx(1 / (2 * math.pi * preset("example-coarse").gm_parasitic_cap))
    # die area: the same design on a card with a 0.1 mm² die
    small = CARD.replace(die_area=0.1e-6)
    oc = _stretch(technology=small)
    assert [lim.name for lim in oc.limits if not lim.met] == ["die area"]
    # gm per cell: a 60 dB target needs cells beyond the card's largest
    oc = _stretch(snr_target=60.0, prototype="ladder")
    assert "gm of one transconductor" in {lim.name for lim in oc.limits if not lim.met}
    # spiral self-resonance inside the band: the LC line on a card with a thin oxide under
    # its spirals (100× the track capacitance)
    thin = CARD.replace(inductor_substrate_cap=100 * CARD.inductor_substrate_cap)
    oc = _stretch(technology=thin, realization="lc")
    sr = next(lim for lim in oc.limits if lim.name == "spiral self-resonance")
    assert not sr.met and sr.need == pytest.approx(oc.design.band_high)
    # infeasible designs keep their metrics
    assert np.isfinite(oc.metrics["snr_db"].value).all() and oc.bill.area > 0


def test_a_design_run_on_another_card_shifts_with_its_gm_and_capacitance():
    # sized at typical, evaluated at the slow corner: every gm × gm_factor, every C ×
    # cap_factor, so the delay (∝ C/gm) grows by cap_factor/gm_factor and the highest pole
    # falls by as much
    oc = _stretch()
    slow = CARD.at_corner("slow")
    m = SwitchedBandwidth()
    sim = m.simulate(X, oc.design, oc.params, np.random.default_rng(0), 1, slow)
    ratio = slow.cap_factor / slow.gm_factor
    assert sim.metrics["delay"].value == pytest.approx(oc.design.delay * ratio, rel=1e-12)
    # the output really moves: its peak comes later by about the delay change
    t_typ = oc.pulse.t[np.argmax(np.abs(oc.pulse.values[0]))]
    t_slow = sim.pulse.t[np.argmax(np.abs(np.atleast_2d(sim.pulse.values)[0]))]
    assert t_slow - t_typ > 0.5 * oc.design.delay * (ratio - 1)
    lim = {x.name: x for x in m.limits(oc.design, oc.params, slow)}
    typ = {x.name: x for x in oc.limits}
    assert lim["highest filter pole"].need == pytest.approx(typ["highest filter pole"].need / ratio)
    # hotter: gm ∝ (T/T_nom)^-x at a fixed bias (the card's own law), thermal noise ∝ T/C
    hot = CARD.at_corner("typical", 398.15)
    sim_hot = m.simulate(X, oc.design, oc.params, np.random.default_rng(0), 1, hot)
    assert sim_hot.metrics["delay"].value == pytest.approx(oc.design.delay / hot.gm_factor, rel=1e-12)
    assert sim_hot.metrics["snr_db"].value[0] < oc.metrics["snr_db"].value[0] - 0.5

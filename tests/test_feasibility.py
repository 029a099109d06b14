"""Process limits in the contract: a design the card cannot build is "infeasible", with its
metrics kept and the binding limit named; parameter bounds are refused with their range."""

import dataclasses
import json
import math

import numpy as np
import pytest

import timescale
from timescale.plugin import Design, Limit, param

from toy_methods import Ideal


def test_limit_margin_and_wording():
    # "max" limit: need 53 GHz where 20 GHz is allowed -> margin 20/53
    lim = Limit("chirp span", need=53e9, allowed=20e9, units="Hz")
    assert lim.margin == pytest.approx(20 / 53) and not lim.met
    assert lim.describe().startswith("chirp span: needs 5.3e+10 Hz, exceeds the card's 2e+10 Hz")
    # "min" limit: a 40 dB need met by 46 dB available
    ok = Limit("output SNR", need=46.0, allowed=40.0, units="dB", kind="min")
    assert ok.met and ok.margin == pytest.approx(46 / 40)
    assert Limit("x", need=0.0, allowed=1.0).margin == math.inf
    with pytest.raises(ValueError, match="kind"):
        Limit("x", need=1.0, allowed=1.0, kind="at most")
    with pytest.raises(ValueError, match="need"):
        Limit("x", need=-1.0, allowed=1.0)


@dataclasses.dataclass(frozen=True)
class _CappedParams:
    cap: float = param(3.0, doc="largest factor the toy card can build", bounds=(1.0, 10.0))
    gain: float = param(1.0, doc="output gain")


class Capped(Ideal):
    """Builds any factor, but the card allows factors up to `cap` only."""

    name = "test-capped"
    Params = _CappedParams

    def design(self, pulse, factor, params, technology):
        return Design(factor=factor)

    def limits(self, design, params, technology):
        return (Limit("factor reach", need=design.factor, allowed=params.cap, note="toy"),
                Limit("die area", need=1e-6, allowed=25e-6, units="m2"))


def test_infeasible_cells_keep_their_metrics_and_name_the_binding_limit():
    x = timescale.Pulse.gaussian(sigma=80e-12, center=0.6e-9, duration=2e-9, rate=60e9, name="g")
    with timescale.registered(Capped()):
        ds = timescale.compare(x, ["test-capped"], [2.0, 5.0], seed=0)
    st = ds["status"].sel(method_name="test-capped", pulse="g")
    assert list(st.values) == ["ok", "infeasible"]
    assert ds.attrs["n_infeasible"] == 1
    bad = {"method_name": "test-capped", "pulse": "g", "factor": 5.0}
    # metrics are still computed: the ideal toy is exact whatever its card says
    assert float(ds["nrmse"].sel(bad)) < 1e-9
    assert str(ds["message"].sel(bad).values).startswith("infeasible: factor reach: needs 5")
    assert str(ds["binding_limit"].sel(bad).values) == "factor reach"
    assert float(ds["limit_margin"].sel(bad)) == pytest.approx(3.0 / 5.0)
    good = {"method_name": "test-capped", "pulse": "g", "factor": 2.0}
    assert float(ds["limit_margin"].sel(good)) == pytest.approx(1.5)
    checked = json.loads(str(ds["limits"].sel(good).values))
    assert [c["name"] for c in checked] == ["factor reach", "die area"]
    assert checked[1]["margin"] == pytest.approx(25.0)
    # a method without limits has no margin (NaN) and no binding limit
    assert np.isnan(float(timescale.compare(x, [Ideal()], [2.0])["limit_margin"].squeeze()))


def test_param_bounds_are_enforced_with_their_range():
    m = Capped()
    assert m.make_params(cap=10.0).cap == 10.0
    with pytest.raises(ValueError, match=r"'cap' of method 'test-capped' must be in \[1, 10\], got 0.5"):
        m.make_params(cap=0.5)
    with pytest.raises(ValueError, match="low <= high"):
        param(1.0, bounds=(2.0, 1.0))


def test_limits_must_be_limit_records():
    class Wrong(Capped):
        name = "test-wrong-limits"

        def limits(self, design, params, technology):
            return ({"name": "area"},)

    x = timescale.Pulse.gaussian(sigma=80e-12, center=0.6e-9, duration=2e-9, rate=60e9, name="g")
    with pytest.raises(TypeError, match="must return timescale.plugin.Limit"):
        timescale.stretch(x, Wrong(), 2.0)

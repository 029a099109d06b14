"""What a plugin author imports: the method base class and the records it returns.

A time-scaling method is a subclass of :class:`Method` with class-level metadata (``name``,
``summary``, a frozen ``Params`` dataclass) and three operations:

``design(pulse, factor, params, technology) -> Design``
    Size the hardware for this pulse, this stretch factor and this process.
``simulate(pulse, design, params, rng, trials) -> Simulation``
    Run the pulse through the designed hardware, with non-idealities, batched over trials.
``bill(design, params, technology) -> Bill``
    Area, power, energy per pulse, component counts and the internal bandwidth needed.

A plugin module exposes the methods through the ``timescale_methods`` hook::

    from timescale.plugin import hookimpl

    @hookimpl
    def timescale_methods():
        return [MyMethod()]

and registers the module under ``[project.entry-points.timescale]`` in its ``pyproject.toml``.

Conventions (they are part of the contract):

* SI units everywhere (s, Hz, V, A, F, S, H, m, m², W, J).
* Stretch factor ``factor`` = α: α > 1 stretches, 0 < α < 1 compresses. The ideal output is
  ``g · x((t − d)/α)``; a method whose image is time-reversed sets ``orientation = -1`` in its
  :class:`Simulation`, and the metrics then compare against ``g · x(−(t − d)/α)``.
* Signals are written with e^{+jωt}; a dispersive element is ``exp(−jΦω²/2)``.
* Output values carry the trials on the leading axis: shape ``(trials, n)``.
* Every stochastic effect draws from the ``numpy.random.Generator`` passed to ``simulate``.
"""

from __future__ import annotations

import abc
import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
import pluggy

from timescale.data.errors import (
    DesignWarning,
    SamplingWarning,
    TimescaleWarning,
    closest,
)
from timescale.data.pulse import Pulse
from timescale.data.technology import Technology

__all__ = [
    "hookimpl",
    "Method",
    "Design",
    "Bill",
    "BillItem",
    "Metric",
    "Limit",
    "Simulation",
    "Outcome",
    "Pulse",
    "Technology",
    "TimescaleWarning",
    "DesignWarning",
    "SamplingWarning",
    "param",
]

#: Decorator for a plugin's hook implementations (``@hookimpl def timescale_methods(): ...``).
hookimpl = pluggy.HookimplMarker("timescale")


def param(default, *, units: str = "", doc: str = "", choices: tuple | None = None,
          bounds: tuple | None = None):
    """Declare a field of a method's ``Params`` dataclass with its unit and meaning.

    Parameters
    ----------
    default
        Default value (immutable).
    units : str
        SI unit of the value ("" for dimensionless, "bit", ...).
    doc : str
        One line saying what the parameter sets.
    choices : tuple, optional
        The valid values, for a parameter that picks one of several options.
    bounds : tuple of (low, high), optional
        Inclusive limits of a numeric parameter, in its `units`; either may be None (open).
        :meth:`Method.make_params` refuses a value outside them, naming them.
    """
    meta = {"units": units, "doc": doc}
    if choices is not None:
        meta["choices"] = tuple(choices)
    if bounds is not None:
        lo, hi = bounds
        if lo is not None and hi is not None and lo > hi:
            raise ValueError(f"param bounds must be (low, high) with low <= high, got {bounds!r}")
        meta["bounds"] = (lo, hi)
    return field(default=default, metadata=meta)


@dataclass(frozen=True, kw_only=True)
class Design:
    """Base of every method's design record (subclass it as a frozen, kw_only dataclass).

    Attributes
    ----------
    factor : float
        The stretch factor α the design realises (dimensionless).
    notes : tuple of str
        Plain-language remarks about the sizing choices.
    """

    factor: float
    notes: tuple[str, ...] = ()

    def as_dict(self) -> dict[str, Any]:
        """Return the design as a JSON-friendly dict (arrays become lists)."""
        return _jsonable(dataclasses.asdict(self))


@dataclass(frozen=True)
class BillItem:
    """One block of a bill.

    Attributes
    ----------
    name : str
        What the block is ("capture ADC", "section capacitors", ...).
    area : float
        Silicon area, m².
    power : float
        Power while active, W.
    count : int
        How many of this block.
    note : str
        How the figure was obtained.
    """

    name: str
    area: float = 0.0
    power: float = 0.0
    count: int = 1
    note: str = ""


@dataclass(frozen=True, kw_only=True)
class Bill:
    """Cost of a design.

    Attributes
    ----------
    area : float
        Total silicon area, m².
    power : float
        Power while the hardware is active, W.
    energy_per_pulse : float
        Energy spent to process one pulse, J.
    bw_internal : float
        Highest bandwidth any internal node must pass, Hz.
    counts : Mapping[str, int]
        Component counts ("capacitors", "transconductors", "inductors", ...).
    items : tuple of BillItem
        The breakdown behind the totals.
    """

    area: float
    power: float
    energy_per_pulse: float
    bw_internal: float
    counts: Mapping[str, int] = field(default_factory=dict)
    items: tuple[BillItem, ...] = ()

    def __post_init__(self):
        object.__setattr__(self, "counts", dict(self.counts))
        for name in ("area", "power", "energy_per_pulse", "bw_internal"):
            value = getattr(self, name)
            if not (isinstance(value, (int, float, np.floating)) and value >= 0):
                raise ValueError(f"Bill.{name} must be a number >= 0, got {value!r}")

    @classmethod
    def from_items(
        cls,
        items,
        *,
        active_time: float,
        bw_internal: float,
        counts: Mapping[str, int] | None = None,
    ) -> "Bill":
        """Sum a breakdown into a bill.

        Parameters
        ----------
        items : iterable of BillItem
            Blocks; their area and power are summed.
        active_time : float
            How long the hardware is powered per pulse, s (energy = power · active_time).
        bw_internal : float
            Highest internal bandwidth, Hz.
        counts : Mapping[str, int], optional
            Component counts.
        """
        items = tuple(items)
        area = float(sum(i.area for i in items))
        power = float(sum(i.power for i in items))
        return cls(
            area=area,
            power=power,
            energy_per_pulse=power * float(active_time),
            bw_internal=float(bw_internal),
            counts=dict(counts or {}),
            items=items,
        )

    def as_dict(self) -> dict[str, Any]:
        """Return the bill as a JSON-friendly dict."""
        d = dataclasses.asdict(self)
        d["counts"] = dict(self.counts)
        return _jsonable(d)


@dataclass(frozen=True)
class Limit:
    """One process limit a design is checked against (see :meth:`Method.limits`).

    Attributes
    ----------
    name : str
        What is limited, in plain words ("gm cell's own pole", "chirp span", "die area").
    need : float
        What the design needs, in `units`.
    allowed : float
        What the technology card allows, in `units`.
    units : str
        SI unit of `need` and `allowed`.
    kind : {"max", "min"}
        "max": the need must not exceed what is allowed; "min": it must reach it.
    note : str
        Where the allowed value comes from.
    """

    name: str
    need: float
    allowed: float
    units: str = ""
    kind: str = "max"
    note: str = ""

    def __post_init__(self):
        if self.kind not in ("max", "min"):
            raise ValueError(f"Limit.kind must be 'max' or 'min', got {self.kind!r}")
        for k in ("need", "allowed"):
            v = getattr(self, k)
            if not isinstance(v, (int, float, np.integer, np.floating)) or isinstance(v, bool) or not v >= 0:
                raise ValueError(f"Limit.{k} of {self.name!r} must be a number >= 0, got {v!r}")
            object.__setattr__(self, k, float(v))

    @property
    def margin(self) -> float:
        """How far inside the limit the design sits: allowed/need ("max") or need/allowed
        ("min"); >= 1 means the limit is met (dimensionless)."""
        num, den = (self.allowed, self.need) if self.kind == "max" else (self.need, self.allowed)
        return math.inf if den == 0 else num / den

    @property
    def met(self) -> bool:
        """True when the design respects the limit."""
        return self.margin >= 1.0

    def describe(self) -> str:
        """One line: the limit, what the design needs and what the card allows."""
        verb = "exceeds" if self.kind == "max" else "falls short of"
        state = verb if not self.met else ("within" if self.kind == "max" else "meets")
        return f"{self.name}: needs {self.need:.4g} {self.units}".rstrip() + \
            f", {state} the card's {self.allowed:.4g} {self.units}".rstrip() + f" (margin {self.margin:.3g}x)"

    def as_dict(self) -> dict[str, Any]:
        """JSON-friendly form, with the margin."""
        d = dataclasses.asdict(self)
        d["margin"] = self.margin
        return _jsonable(d)


@dataclass(frozen=True)
class Metric:
    """A method-specific metric added to the results cube.

    Attributes
    ----------
    value : float or array of shape (trials,)
        The value (per trial where it varies).
    units : str
        SI unit ("" for dimensionless, "dB").
    long_name : str
        Plain-language name for tables and axis labels.
    """

    value: Any
    units: str
    long_name: str


@dataclass(frozen=True, kw_only=True)
class Simulation:
    """What ``Method.simulate`` returns.

    Attributes
    ----------
    pulse : Pulse
        The output waveform, values of shape ``(trials, n)`` (or ``(n,)`` when every trial is
        identical). Its time axis is absolute: ``t0`` is the time of the first output sample on
        the same clock as the input.
    orientation : int
        +1 for an upright image, −1 when the method reverses time (the metrics then compare
        against the reversed reference).
    metrics : Mapping[str, Metric]
        Method-specific metrics (leakage, noise, ...).
    path : str
        How the simulation was carried out ("exact", "complex baseband", ...), for the record.
    clean : Pulse, optional
        The noise-free output when ``pulse`` includes random noise, so that output noise and
        SNR can be reported apart from distortion; None when no noise was added.
    """

    pulse: Pulse
    orientation: int = 1
    metrics: Mapping[str, Metric] = field(default_factory=dict)
    path: str = "exact"
    clean: Pulse | None = None

    def __post_init__(self):
        if self.orientation not in (1, -1):
            raise ValueError(f"orientation must be +1 or -1, got {self.orientation!r}")
        object.__setattr__(self, "metrics", dict(self.metrics))


@dataclass(frozen=True, kw_only=True)
class Outcome:
    """The result of running one pulse through one method at one factor.

    Attributes
    ----------
    method : str
        Method name.
    factor : float
        Requested stretch factor α.
    input : Pulse
        The input pulse.
    pulse : Pulse
        Output waveform (trials on the leading axis).
    design : Design
        The sized hardware.
    bill : Bill
        Its cost.
    params : Any
        The method's ``Params`` instance used.
    orientation : int
        +1 upright, −1 time-reversed image.
    metrics : Mapping[str, Metric]
        Method-specific metrics.
    path : str
        Simulation path.
    clean : Pulse or None
        Noise-free output, when the method adds noise.
    warnings : tuple of str
        Warnings raised while designing or simulating.
    limits : tuple of Limit
        The process limits the design was checked against (met or not).
    """

    method: str
    factor: float
    input: Pulse
    pulse: Pulse
    design: Design
    bill: Bill
    params: Any
    orientation: int = 1
    metrics: Mapping[str, Metric] = field(default_factory=dict)
    path: str = "exact"
    clean: Pulse | None = None
    warnings: tuple[str, ...] = ()
    limits: tuple[Limit, ...] = ()

    @property
    def feasible(self) -> bool:
        """True when the design respects every process limit the method checks."""
        return all(lim.met for lim in self.limits)


class Method(abc.ABC):
    """Base class of a time-scaling method.

    Subclasses set the class attributes and implement :meth:`design`, :meth:`simulate` and
    :meth:`bill`. They must be cheap to construct (no work in ``__init__``) and picklable, since
    suites send them to worker processes by name.

    Class attributes
    ----------------
    name : str
        Unique, lower-case, hyphenated ("switched-bandwidth").
    summary : str
        One line for ``timescale methods``.
    Params : type
        A frozen dataclass whose fields (declared with :func:`param`) carry defaults, units
        and one-line docs.
    version : str
        The plugin's version, recorded in the cube's provenance.
    identity_tolerance : float
        NRMSE the method promises at factor 1 with default parameters.
    factor_tolerance : float
        Relative factor error it promises with default parameters.
    """

    name: ClassVar[str]
    summary: ClassVar[str]
    Params: ClassVar[type]
    version: ClassVar[str] = "0"
    #: NRMSE the method reaches at factor 1 with default parameters (conformance suite).
    identity_tolerance: ClassVar[float] = 1e-6
    #: Relative error allowed between the requested and the fitted factor (conformance suite).
    factor_tolerance: ClassVar[float] = 0.05

    # -- parameters -------------------------------------------------------------------------
    @classmethod
    def param_fields(cls) -> dict[str, dataclasses.Field]:
        """Return the ``Params`` fields by name."""
        return {f.name: f for f in dataclasses.fields(cls.Params)}

    def make_params(self, **values) -> Any:
        """Build a validated ``Params`` instance from keyword values.

        Raises
        ------
        TypeError
            For a name the method does not have (the message lists the valid ones) or a value
            of the wrong type.
        ValueError
            For a value outside its declared ``choices``.
        """
        fields = self.param_fields()
        for key, value in values.items():
            if key not in fields:
                raise TypeError(
                    f"method {self.name!r} has no parameter {key!r}{closest(key, fields)}; "
                    f"valid parameters: {', '.join(sorted(fields)) or '(none)'}"
                )
            _check_param(self.name, fields[key], value)
        return self.Params(**values)

    def describe_params(self) -> list[tuple[str, Any, str, str]]:
        """Return ``(name, default, units, doc)`` for every parameter."""
        return [
            (f.name, f.default, f.metadata.get("units", ""), f.metadata.get("doc", ""))
            for f in dataclasses.fields(self.Params)
        ]

    # -- the three operations ---------------------------------------------------------------
    @abc.abstractmethod
    def design(self, pulse: Pulse, factor: float, params: Any, technology: Technology) -> Design:
        """Size the hardware.

        Parameters
        ----------
        pulse : Pulse
            The input pulse (first batch row if batched).
        factor : float
            Stretch factor α > 0.
        params : Params
            The method's parameters.
        technology : Technology
            Process constants.

        Returns
        -------
        Design
            Raise ``ValueError`` with a reason when the request cannot be met; warn with
            ``DesignWarning`` when it is legal but doubtful.
        """

    @abc.abstractmethod
    def simulate(
        self,
        pulse: Pulse,
        design: Design,
        params: Any,
        rng: np.random.Generator,
        trials: int = 1,
        technology: Technology | None = None,
    ) -> Simulation:
        """Run `pulse` through `design`.

        Parameters
        ----------
        pulse : Pulse
            Input pulse, values of shape ``(n,)``.
        design : Design
            From :meth:`design`.
        params : Params
            The method's parameters.
        rng : numpy.random.Generator
            The only source of randomness.
        trials : int
            Number of Monte Carlo trials; the output has shape ``(trials, n_out)``.
        technology : Technology, optional
            Process constants (temperature for noise, ...).

        Returns
        -------
        Simulation
        """

    @abc.abstractmethod
    def bill(self, design: Design, params: Any, technology: Technology) -> Bill:
        """Return the cost of `design` in `technology`."""

    def limits(self, design: Design, params: Any, technology: Technology) -> tuple[Limit, ...]:
        """Check `design` against what `technology` can build (optional; default: none).

        Return one :class:`Limit` per check, met or not: a design with any unmet limit is
        recorded as ``"infeasible"`` (its metrics are still computed and stored), and the
        limit with the smallest margin is named as the binding one.
        """
        return ()

    def __repr__(self) -> str:
        return f"<timescale method {self.name!r}>"


def _check_param(method: str, f: dataclasses.Field, value) -> None:
    choices = f.metadata.get("choices")
    if choices is not None and value not in choices:
        raise ValueError(
            f"parameter {f.name!r} of method {method!r} must be one of "
            f"{', '.join(map(repr, choices))}; got {value!r}{closest(value, map(str, choices))}"
        )
    default = f.default
    if default is dataclasses.MISSING or default is None or value is None:
        return
    if isinstance(default, bool):
        ok = isinstance(value, (bool, np.bool_))
    elif isinstance(default, int):
        ok = isinstance(value, (int, np.integer)) and not isinstance(value, bool)
    elif isinstance(default, float):
        ok = isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
        if ok and not math.isfinite(float(value)):
            raise ValueError(f"parameter {f.name!r} of method {method!r} must be finite, got {value!r}")
    elif isinstance(default, str):
        ok = isinstance(value, str)
    else:
        ok = True
    if not ok:
        raise TypeError(
            f"parameter {f.name!r} of method {method!r} must be {type(default).__name__} "
            f"(like the default {default!r}), got {value!r} ({type(value).__name__})"
        )
    bounds = f.metadata.get("bounds")
    if bounds is not None:
        lo, hi = bounds
        if (lo is not None and value < lo) or (hi is not None and value > hi):
            units = f.metadata.get("units", "")
            span = (f">= {lo:g}" if hi is None else f"<= {hi:g}" if lo is None else f"in [{lo:g}, {hi:g}]")
            raise ValueError(f"parameter {f.name!r} of method {method!r} must be {span}"
                             f"{' ' + units if units else ''}, got {value!r}")


def _jsonable(obj):
    if isinstance(obj, Mapping):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating,)):
        return float(obj)
    if isinstance(obj, (str, int, float, bool)) or obj is None:
        return obj
    return repr(obj)


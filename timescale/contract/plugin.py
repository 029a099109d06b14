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


def param(default, *, units: str = "", doc: str = "", choices: tuple | None = None):
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
    """
    meta = {"units": units, "doc": doc}
    if choices is not None:
        meta["choices"] = tuple(choices)
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


"""ngspice's linear device semantics for R, L and C: ``.model`` cards, temperature, m=, scale=, ac=.

The reader (``model.netlist_cards``) evaluates each instance and model parameter to a number and asks
this module for the element's AC value, so the formulas live in one place, as ngspice 39 applies them.

Provenance: the parameter tables and the order of the formulas were read from ngspice's device source
(``src/spicelib/devices/{res,cap,ind}``: ``res.c``/``restemp.c``, ``cap.c``/``capsetup.c``/``captemp.c``,
``ind.c``/``indsetup.c``/``indtemp.c``, ``inp2r.c``, ``inpdomod.c``) in a 2015 snapshot of the ngspice
repository; the version tests run against (libngspice 39) differs from that snapshot, so each formula
was then measured with ngspice 39 on small dividers (``tests/ngspice_direct.ngspice_ac``), and where
the two disagreed the measurement wins: ngspice 39 subtracts ``2*short`` and ``2*narrow`` from a sheet
resistor's length and width (the snapshot subtracts them once), reads C and L cards only in the form
``name n+ n- model value`` (``value model`` is refused), takes the ``.model`` types R, RES, C and L
(CAP and IND are refused), and takes m= on R L C I G F but not on V E H.
These functions only compute numbers from numbers: no user text reaches them.
"""

from __future__ import annotations

from dataclasses import dataclass

from crosscheck.errors import CrosscheckError

__all__ = [
    "COMMON_KEYS",
    "INSTANCE_KEYS",
    "INSTANCE_NO_AC_EFFECT",
    "KIND_WORDS",
    "DEFAULT_TEMPERATURE",
    "MODEL_KINDS",
    "ModelProblem",
    "Temperatures",
    "model_parameter",
    "other_model_type",
    "passive_value",
    "temperature_factor",
]

#: ngspice's default circuit temperature and nominal (measurement) temperature, °C.
DEFAULT_TEMPERATURE = 27.0
#: The ``.model`` types ngspice 39 takes for the linear passives (measured: ``cap`` and ``ind`` are refused).
MODEL_KINDS = {"r": "R", "res": "R", "c": "C", "l": "L"}

#: The instance parameters of R, C and L: spelling -> canonical name ("value" is the element's value).
INSTANCE_KEYS = {
    "r": {"r": "value", "resistance": "value", "ac": "ac", "l": "l", "w": "w", "tc": "tc1"},
    "c": {"c": "value", "cap": "value", "capacitance": "value", "l": "l", "w": "w"},
    "l": {"l": "value", "inductance": "value"},
}
COMMON_KEYS = {k: k for k in ("temp", "dtemp", "m", "tc1", "tc2", "scale")}
#: Instance parameters read with a note: they do not change an AC answer.
INSTANCE_NO_AC_EFFECT = {
    "ic": "an initial condition only affects transient analysis",
    "noisy": "it only affects noise analysis",
    "bv_max": "a breakdown limit: ngspice only warns when it is exceeded",
}
KIND_WORDS = {"R": "resistor", "C": "capacitor", "L": "inductor"}

#: Device model types of ngspice that are not linear passives, by what they describe.
_OTHER_TYPES = {
    "d": "a diode",
    **dict.fromkeys(("npn", "pnp"), "a bipolar transistor"),
    **dict.fromkeys(("nmos", "pmos", "vdmos"), "a MOSFET"),
    **dict.fromkeys(("njf", "pjf"), "a JFET"),
    **dict.fromkeys(("nmf", "pmf", "nhfet", "phfet"), "a MESFET or HFET"),
    "sw": "a voltage-controlled switch",
    "csw": "a current-controlled switch",
    **dict.fromkeys(("ltra", "txl", "cpl"), "a transmission line"),
    "urc": "a distributed RC line",
    **dict.fromkeys(("cap", "ind"), "nothing in ngspice (it refuses this type name)"),
}

#: Each kind's model parameters: spelling -> canonical name (aliases as in ngspice's tables).
_MODEL_PARAMS = {
    "R": {
        "rsh": "rsh", "narrow": "narrow", "dw": "narrow", "short": "short", "dlr": "short",
        "tc1": "tc1", "tc1r": "tc1", "tc2": "tc2", "tc2r": "tc2", "defw": "defw", "w": "defw",
        "l": "defl", "tnom": "tnom", "r": "r", "res": "r",
    },
    "C": {
        "cap": "cap", "cj": "cj", "cox": "cj", "cjsw": "cjsw", "capsw": "cjsw", "defw": "defw", "w": "defw",
        "defl": "defl", "l": "defl", "narrow": "narrow", "short": "short", "del": "del",
        "tc1": "tc1", "tc2": "tc2", "tnom": "tnom",
    },
    "L": {"ind": "ind", "tc1": "tc1", "tc2": "tc2", "tnom": "tnom"},
}  # fmt: skip
#: Model parameters read with a note: they do not change an AC answer.
_NO_AC_EFFECT = {
    **dict.fromkeys(("kf", "af", "lf", "wf", "ef"), "a noise parameter: it only affects noise analysis"),
    "bv_max": "a breakdown limit: ngspice only warns when it is exceeded",
    "c": "the capacitor model flag",
}
#: Model parameters that change the answer and crosscheck does not compute, with what to write instead.
_NOT_IMPLEMENTED = {
    "di": "write the capacitance per area as cj= (or the value on the C card)",
    "thick": "write the capacitance per area as cj= (or the value on the C card)",
    "csect": "write the inductance as ind= (or the value on the L card)",
    "length": "write the inductance as ind= (or the value on the L card)",
    "nt": "write the inductance as ind= (or the value on the L card)",
    "mu": "write the inductance as ind= (or the value on the L card)",
}


class ModelProblem(CrosscheckError, ValueError):
    """A model or instance parameter that cannot be used; ``key`` names it (for the line), or None."""

    def __init__(self, message: str, key: str | None = None):
        super().__init__(message)
        self.key = key


@dataclass
class Temperatures:
    """The circuit temperature (``.temp``, ``.options temp=``) and the default tnom (``.options tnom=``)."""

    temp: float = DEFAULT_TEMPERATURE
    tnom: float = DEFAULT_TEMPERATURE


def other_model_type(type_name: str) -> str | None:
    """What a ``.model`` type that is not R, RES, C or L describes (None when ngspice has no such type)."""
    return _OTHER_TYPES.get(type_name.lower())


def model_parameter(kind: str, key: str) -> tuple[str | None, str | None]:
    """``(canonical name, None)`` for a parameter that counts, ``(None, note)`` for one with no AC effect.

    Raises ``ModelProblem`` for a parameter that changes the answer but is not implemented, or is unknown.
    """
    key = key.lower()
    if key in _MODEL_PARAMS[kind]:
        return _MODEL_PARAMS[kind][key], None
    if key in _NO_AC_EFFECT and (key != "c" or kind == "C"):
        return None, _NO_AC_EFFECT[key]
    if key in _NOT_IMPLEMENTED and kind in ("C" if key in ("di", "thick") else "L"):
        raise ModelProblem(
            f"the {kind} model parameter {key}= is not implemented by crosscheck; {_NOT_IMPLEMENTED[key]}", key
        )
    known = " ".join(sorted(_MODEL_PARAMS[kind]))
    raise ModelProblem(f"{key}= is not a {kind} model parameter crosscheck knows (it reads: {known})", key)


def temperature_factor(tc1: float, tc2: float, temp: float, tnom: float) -> float:
    """``1 + tc1·ΔT + tc2·ΔT²`` with ``ΔT = temp - tnom`` (ngspice's restemp/captemp/indtemp)."""
    difference = temp - tnom
    return 1.0 + tc1 * difference + tc2 * difference * difference


def passive_value(
    kind: str, value: float | None, inst: dict[str, float], model: dict[str, float], temps: Temperatures
) -> float:
    """The AC value of an R (ohms), C (farads) or L (henries), as ngspice 39 computes it.

    ``value`` is the instance's own value (None when not given); ``inst`` the instance parameters
    (ac temp dtemp l w m tc1 tc2 scale), ``model`` the canonical model parameters. Resistors: the AC
    resistance is ``ac`` when given, else the value, else ``rsh·(l - 2·short)/(w - 2·narrow)`` when
    ``rsh·l·w > 0`` (l, w default to the model's l and defw, 10 µm), else the model's r; then
    ``×factor×scale/m``. Capacitors: value, else the model's cap, else
    ``cj·(w - narrow)·(l - short) + 2·cjsw·((l - short) + (w - narrow))`` (w defaults to defw, 10 µm;
    l to 0; narrow and short to 2·del), then ``×factor×scale×m``. Inductors: value, else the model's
    ind, then ``×factor×scale/m``. ``factor`` is ``temperature_factor`` with the instance's temp (its
    dtemp then ignored, as ngspice does) or the circuit's temperature plus dtemp, against the model's
    tnom or the circuit's; instance tc1/tc2 override the model's.
    """
    base = _base_value(kind, value, inst, model)
    temp = inst["temp"] if "temp" in inst else temps.temp + inst.get("dtemp", 0.0)
    tnom = model.get("tnom", temps.tnom)
    tc1 = inst.get("tc1", model.get("tc1", 0.0))
    tc2 = inst.get("tc2", model.get("tc2", 0.0))
    m = inst.get("m", 1.0)
    if m <= 0:
        raise ModelProblem(f"the multiplier m={m:g} must be positive (the number of devices in parallel)", "m")
    if kind == "R" and "ac" in inst:
        base = inst["ac"]
    scaled = base * temperature_factor(tc1, tc2, temp, tnom) * inst.get("scale", 1.0)
    return scaled * m if kind == "C" else scaled / m


def _base_value(kind: str, value: float | None, inst: dict[str, float], model: dict[str, float]) -> float:
    """The value at tnom before scale and m: the instance's own, else what the model gives."""
    if value is not None:
        return value
    if kind == "R":
        rsh = model.get("rsh", 0.0)
        length, width = inst.get("l", model.get("defl", 10e-6)), inst.get("w", model.get("defw", 10e-6))
        if rsh * length * width > 0:
            return rsh * (length - 2 * model.get("short", 0.0)) / (width - 2 * model.get("narrow", 0.0))
        if "r" in model:
            return model["r"]
        raise ModelProblem("no resistance: give a value, or a .model with r= or rsh= (ngspice would quietly use 1 mΩ)")
    if kind == "C":
        if "cap" in model:
            return model["cap"]
        if "cj" not in model and "cjsw" not in model:
            raise ModelProblem("no capacitance: give a value, or a .model with cap=, cj= or cjsw=")
        width = inst.get("w", model.get("defw", 10e-6)) - model.get("narrow", 2 * model.get("del", 0.0))
        length = inst.get("l", 0.0) - model.get("short", 2 * model.get("del", 0.0))
        return model.get("cj", 0.0) * width * length + model.get("cjsw", 0.0) * 2 * (length + width)
    if "ind" in model:
        return model["ind"]
    raise ModelProblem("no inductance: give a value, or a .model with ind=")

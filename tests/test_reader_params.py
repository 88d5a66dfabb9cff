"""Parameter expressions and subcircuit parameters, read as ngspice reads them.

Every value check runs ngspice (``tests/ngspice_direct.ngspice_ac``) on the same netlist text inside
the test and compares its node voltage with the own route's open-circuit voltage at that node
(``reduce_netlist(..., engine="own")``), to 1e-9 relative. A current source of 1 A feeding a resistor
to ground makes the node voltage equal to the resistance, so each resistor value written as an
expression is read back as a voltage; offsets keep every value positive. The expressions are chosen
so that a plausible other meaning (log10 for log, rounding half up for nint, flooring for int, ...)
gives a different number.
"""

from __future__ import annotations

import pytest

from crosscheck.api import reduce_netlist
from crosscheck.errors import NetlistError
from crosscheck.model.netlist import read_netlist, read_netlist_with_notes
from tests.ngspice_direct import ngspice_ac

REL = 1e-9  # tolerance: both routes solve a tiny network in double precision


def agree(text: str, *nodes: str) -> dict[str, complex]:
    """ngspice's voltage at each node and the own route's open-circuit voltage there agree to REL."""
    spice = ngspice_ac(text, 1.0, list(nodes))
    for node in nodes:
        own = reduce_netlist(text, (node, "0"), [1.0], engine="own").own
        assert own is not None
        assert own[0].vth == pytest.approx(spice[node], rel=REL), (node, own[0].vth, spice[node])
    return spice


def one_value(expr: str, params: str = "") -> str:
    return f"value\n{params}I1 0 n AC 1\nR1 n 0 {expr}\n"


# ----------------------------------------------------------------------------- built-in functions

FUNCTIONS = {  # name -> an expression whose value tells ngspice's meaning apart from the usual others
    "sqrt": "{sqrt(16)}",
    "abs": "{abs(-3)}",
    "exp": "{exp(1)}",
    "ln": "{ln(100)}",
    "log": "{log(100)}",  # natural log in ngspice (4.6), not log10 (2)
    "log10": "{log10(100)}",
    "pow": "{pow(-2,3)+20}",
    "pwr": "{pwr(-2,3)+20}",  # ngspice: |x|^y, so 28 here, not 12
    "sin": "{sin(1)+1}",
    "cos": "{cos(1)}",
    "tan": "{tan(1)}",
    "atan": "{atan(1)}",
    "asin": "{asin(0.5)}",
    "acos": "{acos(0.5)}",
    "sinh": "{sinh(1)}",
    "cosh": "{cosh(1)}",
    "tanh": "{tanh(1)}",
    "asinh": "{asinh(1)}",
    "acosh": "{acosh(2)}",
    "atanh": "{atanh(0.5)}",
    "min": "{min(3,4)}",
    "max": "{max(3,4)}",
    "floor": "{floor(-2.5)+10}",
    "ceil": "{ceil(-2.5)+10}",
    "int": "{int(-2.7)+10}",  # towards zero: 8, where floor would give 7
    "nint": "{nint(2.5)+nint(-2.5)*10+100}",  # half to even: 2 and -2, so 82
    "sgn": "{sgn(-3)+sgn(0)*10+sgn(5)*100+1000}",
}


@pytest.mark.spice
@pytest.mark.parametrize("name", list(FUNCTIONS))
def test_builtin_function(name: str) -> None:
    """Each built-in function gives ngspice's value (measured by running ngspice on the same text)."""
    agree(one_value(FUNCTIONS[name]), "n")


OPERATORS = {
    "ternary_true": "{1<2 ? 5 : 7}",
    "ternary_nested": "{0 ? 3 : 1 ? 6 : 9}",
    "equal": "{(1==1)*10 + (1!=1)*100 + 1}",
    "order": "{(2<=2) + (2>=3)*10 + (1<2)*100 + (1>2)*1000 + 1}",
    "and_or": "{(1<2 && 2<1) + (1<2 || 2<1)*10 + (1 || 1 && 0)*100 + 1}",
    "not": "{!0 + 4}",
    "unary_minus_below_power": "{-2^2 + 10}",
    "power_left_associative": "{2^3^2}",
    "double_star": "{2**3**2 + 2**-1}",
    "subtraction_left_associative": "{4-3-1+2 + 8/2/2}",
    "parameters": "{-a*2 + b/3 + a*b*a + 20}",
}


@pytest.mark.spice
@pytest.mark.parametrize("name", list(OPERATORS))
def test_operator(name: str) -> None:
    """Comparisons, && || !, the ternary and the precedence of ^ and ** are ngspice's."""
    agree(one_value(OPERATORS[name], ".param a=3 b=1.5\n"), "n")


# ----------------------------------------------------------------------------- quotes and .param order


@pytest.mark.spice
@pytest.mark.parametrize(
    "text",
    [
        one_value("'rb*2'", ".param rb=5\n"),
        one_value("' rb * 2 + min(rb, 3) '", ".param rb=5\n"),
        one_value("{rc}", ".param rb=5 rc='rb*3'\n"),
        one_value("r='rb*2'", ".param rb=5\n"),
        "t\n.param rb=5\nI1 0 n AC 'rb/5'\nR1 n 0 'rb*2'\n",
    ],
    ids=["value", "value_with_blanks_and_commas", "param", "key_value", "source"],
)
def test_single_quoted_expression(text: str) -> None:
    """'expr' is read wherever {expr} is."""
    agree(text, "n")


@pytest.mark.spice
def test_param_may_use_one_defined_further_down() -> None:
    """ngspice orders .param cards by what they use: a={b*2} before b=3 is 6."""
    agree(one_value("{a}", ".param a={b*2}\n.param b=3\n"), "n")


# ----------------------------------------------------------------------------- .func


@pytest.mark.spice
@pytest.mark.parametrize(
    "definition",
    [
        ".func f(a,b) {a*b+1}",
        ".func f(a,b) = a*b+1",
        ".func f(a,b) 'a*b+1'",
        ".func f(a,b) = {a*b+1}",
        ".func f(a,b) a*b+1",
    ],
    ids=["braces", "equals", "quotes", "equals_braces", "bare"],
)
def test_func_forms(definition: str) -> None:
    """Every .func spelling ngspice takes defines the same function."""
    agree(one_value("{f(2,3)}", definition + "\n"), "n")


@pytest.mark.spice
def test_func_uses_parameters_and_other_functions() -> None:
    agree(one_value("{g(2)}", ".param k=10\n.func f(a) {a*k}\n.func g(x) {f(x)+1}\n"), "n")


@pytest.mark.spice
def test_func_defined_after_its_use() -> None:
    agree("t\nI1 0 n AC 1\nR1 n 0 {f(2)}\n.func f(a) {a*3}\n", "n")


# ----------------------------------------------------------------------------- subcircuit parameters

BLOCK = ".subckt blk a params: rv=7\nR1 a 0 {rv}\n.ends\n"


@pytest.mark.spice
@pytest.mark.parametrize(
    "text",
    [
        f"t\n{BLOCK}I1 0 n AC 1\nX1 n blk\n",
        f"t\n{BLOCK}I1 0 n AC 1\nX1 n blk params: rv=3\n",
        f"t\n{BLOCK}I1 0 n AC 1\nX1 n blk rv=3\n",
        f"t\n{BLOCK}I1 0 n AC 1\nX1 n blk PARAMS: RV=3\n",
        "t\n.subckt blk a rv=7\nR1 a 0 {rv}\n.ends\nI1 0 n AC 1\nX1 n blk\nI2 0 m AC 1\nX2 m blk rv=2\n",
    ],
    ids=[
        "default_with_params",
        "override_with_params",
        "override_without_params",
        "upper_case",
        "default_without_params",
    ],
)
def test_subcircuit_parameter_forms(text: str) -> None:
    """Defaults on the .subckt line and overrides on the X line, with or without params:."""
    nodes = ("n", "m") if "X2" in text else ("n",)
    agree(text, *nodes)


SCOPING = {
    "param_per_instance": "t\n.subckt blk a rv=7\n.param rr={rv*2}\nR1 a 0 {rr}\n.ends\n"
    "I1 0 n AC 1\nX1 n blk\nI2 0 m AC 1\nX2 m blk rv=2\n",
    "default_shadows_global": "t\n.param rv=100\n.subckt blk a rv=7\nR1 a 0 {rv}\n.ends\nI1 0 n AC 1\nX1 n blk\n"
    "I2 0 m AC 1\nR2 m 0 {rv}\n",
    "global_visible": "t\n.param g=100\n.subckt blk a rv=7\nR1 a 0 {rv+g}\n.ends\nI1 0 n AC 1\nX1 n blk\n",
    "subckt_param_shadows_global": "t\n.param g=100\n.subckt blk a\n.param g=5\nR1 a 0 {g}\n.ends\n"
    "I1 0 n AC 1\nX1 n blk\nR9 m 0 {g}\nI2 0 m AC 1\n",
    "default_uses_default": "t\n.subckt blk a x=2 y={x*3}\nR1 a 0 {y}\n.ends\nI1 0 n AC 1\nX1 n blk x=5\n",
    "default_uses_global": "t\n.param g=4\n.subckt blk a y={g*3}\nR1 a 0 {y}\n.ends\nI1 0 n AC 1\nX1 n blk\n",
    "override_is_expression": "t\n.param g=4\n.subckt blk a y=1\nR1 a 0 {y}\n.ends\nI1 0 n AC 1\nX1 n blk y={g+1}\n"
    "I2 0 m AC 1\nX2 m blk y='g*3'\nI3 0 k AC 1\nX3 k blk y=g\n",
    "quoted_default": "t\n.param g=4\n.subckt blk a rv='g*2'\nR1 a 0 {rv}\n.ends\nI1 0 n AC 1\nX1 n blk\n",
    "nested_sees_caller_default": "t\n.param rp=1\n.subckt inner a\nR1 a 0 {rp}\n.ends\n"
    ".subckt outer a rp=9\nX1 a inner\n.ends\nI1 0 n AC 1\nXo n outer\n",
    "nested_sees_caller_param": "t\n.param rp=1\n.subckt inner a\nR1 a 0 {rp}\n.ends\n"
    ".subckt outer a\n.param rp=8\nX1 a inner\n.ends\nI1 0 n AC 1\nXo n outer\n",
    "caller_passes_its_parameter": "t\n.subckt inner a rq=1\nR1 a 0 {rq}\n.ends\n.subckt outer a rp=9\n"
    "X1 a inner rq={rp*2}\n.ends\nI1 0 n AC 1\nXo n outer rp=4\nI2 0 m AC 1\nXp m outer\n",
    "param_order_in_subckt": "t\n.subckt blk a rv=7\n.param p1={p2*2}\n.param p2={rv+1}\nR1 a 0 {p1}\n.ends\n"
    "I1 0 n AC 1\nX1 n blk\n",
    "override_wins_over_subckt_param": "t\n.subckt blk a\n.param rv=7\nR1 a 0 {rv}\n.ends\nI1 0 n AC 1\nX1 n blk rv=3\n"
    "I2 0 m AC 1\nX2 m blk\n",
    "subckt_param_wins_over_default": "t\n.subckt blk a rv=1\n.param rv=7\nR1 a 0 {rv}\n.ends\nI1 0 n AC 1\nX1 n blk\n"
    "I2 0 m AC 1\nX2 m blk rv=3\n",
    "func_in_subckt": "t\n.subckt blk a rv=7\n.func ff(x) {x*rv}\nR1 a 0 {ff(2)}\n.ends\nI1 0 n AC 1\nX1 n blk rv=3\n",
}


@pytest.mark.spice
@pytest.mark.parametrize("name", list(SCOPING))
def test_subcircuit_parameter_scoping(name: str) -> None:
    """Per-instance .param, shadowing, defaults using each other, and what a nested instance sees."""
    text = SCOPING[name]
    nodes = [n for n in ("n", "m", "k") if f" 0 {n} AC" in text]
    agree(text, *nodes)


def test_instances_differ_by_their_parameters() -> None:
    """The element values are evaluated per instance (not a stored number: two instances, two values)."""
    net = read_netlist(SCOPING["param_per_instance"])
    assert net.element("r.x1.r1").value != net.element("r.x2.r1").value


# ----------------------------------------------------------------------------- errors


@pytest.mark.parametrize(
    ("text", "line", "words"),
    [
        (one_value("{sqr(2)}"), 3, ("unknown function 'sqr'", "sqrt")),
        (one_value("{max(2)}"), 3, ("takes 2 argument(s), 1 given", "max(x, y)")),
        (one_value("{f(1,2)}", ".func f(x) {x*2}\n"), 4, ("takes 1 argument(s), 2 given", "f(x)")),
        (one_value("{f(1)}", ".func f(x) {g(x)}\n.func g(y) {f(y)}\n"), 2, ("calls itself", "f -> g -> f")),
        (f"t\n{BLOCK}I1 0 n AC 1\nX1 n blk rw=3\n", 6, ("no parameter 'rw'", "its parameters: rv", "params: rw=")),
        (one_value("{a}", ".param a={b} b={a}\n"), 2, ("circle", "a -> b -> a")),
        (one_value("{sqrt(a)}", ".param a=-4\n"), 4, ("no real value",)),
        (one_value("{log}"), 3, ("unknown parameter 'log'", "write log(...)")),
        (one_value("'2*3"), 3, ("closing quote",)),
        ("t\n.func sqrt(x) {x}\n" + one_value("1")[6:], 2, ("hide the built-in",)),
        ("t\n.subckt blk a rv=1 rv=2\nR1 a 0 {rv}\n.ends\nI1 0 n AC 1\nX1 n blk\n", 2, ("given twice",)),
        (f"t\n{BLOCK}I1 0 n AC 1\nX1 n blk rv=3 rv=4\n", 6, ("given twice",)),
    ],
    ids=[
        "unknown_function",
        "builtin_argument_count",
        "func_argument_count",
        "recursive_func",
        "unknown_override",
        "param_circle",
        "sqrt_of_negative",
        "function_as_parameter",
        "unclosed_quote",
        "func_hides_builtin",
        "default_twice",
        "override_twice",
    ],
)
def test_expression_errors_name_the_line_and_the_fix(text: str, line: int, words: tuple[str, ...]) -> None:
    with pytest.raises(NetlistError) as info:
        read_netlist(text, "p.cir")
    message = str(info.value)
    assert message.startswith(f"p.cir:{line}:"), message
    for word in words:
        assert word in message, message


def test_error_inside_an_instance_names_the_instance() -> None:
    text = "t\n.subckt blk a rv=7\nR1 a 0 {rv/zz}\n.ends\nI1 0 n AC 1\nX1 n blk\n"
    with pytest.raises(NetlistError, match=r"p.cir:3:.*unknown parameter 'zz'.*in instance x1 of 'blk'"):
        read_netlist(text, "p.cir")


def test_deep_function_calls_are_bounded() -> None:
    """Functions doubling their calls at each level stop at the step budget instead of running for ever."""
    funcs = "".join(f".func f{i}(x) {{f{i - 1}(x)+f{i - 1}(x)}}\n" for i in range(1, 40))
    with pytest.raises(NetlistError, match="evaluation steps"):
        read_netlist(one_value("{f39(1)}", ".func f0(x) {x}\n" + funcs))


def test_a_subcircuit_never_placed_is_noted_not_read() -> None:
    """Its cards depend on the parameters of an instance that does not exist, so they are not read."""
    text = "t\n.subckt spare a\nR1 a 0 {nowhere}\n.ends\nI1 0 n AC 1\nR1 n 0 1k\n"
    _, notes = read_netlist_with_notes(text, "p.cir")
    assert any(note.startswith("p.cir:2:") and "'spare' is never placed" in note for note in notes), notes


def test_an_unused_subcircuit_parameter_is_still_evaluated() -> None:
    """A parameter no card uses is evaluated per instance all the same, so its error is not hidden."""
    text = "t\n.subckt blk a rv=7\n.param spare={rv/0}\nR1 a 0 {rv}\n.ends\nI1 0 n AC 1\nX1 n blk\n"
    with pytest.raises(NetlistError, match=r"p.cir:3:.*divides by zero.*in instance x1 of 'blk'"):
        read_netlist(text, "p.cir")


@pytest.mark.parametrize(
    ("text", "line"),
    [
        ("t\n.func f(x) {g(x)+1}\n.func g(y) {f(y)*2}\nI1 0 n AC 1\nR1 n 0 5\n", 2),
        ("t\n.subckt blk a\n.func h(x) {h(x)}\nR1 a 0 5\n.ends\nI1 0 n AC 1\nX1 n blk\n", 3),
    ],
    ids=["top_level", "in_subcircuit"],
)
def test_recursive_func_is_refused_even_unused(text: str, line: int) -> None:
    """Not compared with ngspice on purpose: run by hand while writing this test, ngspice (libngspice0 39.3)
    crashed with a segmentation fault loading a netlist with an unused recursive .func, so the reader
    refuses it before any deck is written."""
    with pytest.raises(NetlistError, match=rf"p.cir:{line}:.*calls itself.*write the arithmetic out"):
        read_netlist(text, "p.cir")

"""Start-up and the small-network path: commands load only what they need, and the dense path agrees with
the sparse one.

Behaviour, not timing (timings live in ``benchmarks/startup.py``): each check reads ``sys.modules`` in a
fresh interpreter after the command, so a module-level import of a heavy package anywhere on the path
fails it.
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from crosscheck.fuzz.generate import case_seed, generate_case
from crosscheck.fuzz.knobs import Knobs
from crosscheck.model.graph import SMALL_GRAPH, _small_parts
from crosscheck.own import equivalent, small
from crosscheck.own.equivalent import thevenin

HEAVY = ("pandas", "matplotlib", "PySpice", "scipy.sparse")
#: An 8-node scenario of our own: a sensor amplifier's output through an RC filter and a short cable.
NETLIST = """\
Sensor amplifier output through an RC filter and a short cable
Vamp amp 0 AC 1 0
Rout amp n1 50
R1 n1 n2 1k
C1 n2 0 100n
R2 n2 n3 1k
C2 n3 0 47n
Lc n3 n4 0.4u
Cc n4 0 100p
Rin n4 0 1Meg
.end
"""


def _heavy_after(code: str, cwd: Path) -> list[str]:
    """The heavy packages loaded once ``code`` has run in a fresh interpreter."""
    probe = f"import sys\n{code}\nprint('\\n'.join(sys.modules))"
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True, cwd=cwd).stdout
    loaded = set(out.split())
    return [h for h in HEAVY if h in loaded or any(m.startswith(h + ".") for m in loaded)]


def test_importing_the_command_line_loads_no_heavy_package(tmp_path):
    """`import crosscheck.cli` (all `crosscheck --version` and `--help` load) loads none of pandas,
    matplotlib, PySpice, scipy.sparse -- nor rich, which only the commands' reports need."""
    assert _heavy_after("import crosscheck.cli", tmp_path) == []
    code = "import crosscheck.cli\nassert not [m for m in sys.modules if m.split('.')[0] == 'rich']"
    assert _heavy_after(code, tmp_path) == []


def test_a_small_own_route_reduce_loads_no_heavy_package(tmp_path):
    """A small `reduce --engine own` runs to its report without loading pandas, matplotlib, PySpice or
    scipy.sparse (the small-network path, the reader and the text report need numpy and rich only)."""
    (tmp_path / "sensor.cir").write_text(NETLIST, encoding="utf-8")
    code = (
        "import contextlib, io\n"
        "from crosscheck.cli import main\n"
        "with contextlib.redirect_stdout(io.StringIO()) as out:\n"
        "    code = main(['reduce', 'sensor.cir', '--port', 'n4', '0', '--freq', '1k', '10k', '100k',"
        " '--engine', 'own'])\n"
        "assert code == 0, (code, out.getvalue())\n"
        "assert 'Z_th' in out.getvalue() or 'Zth' in out.getvalue() or 'Thevenin' in out.getvalue(), out.getvalue()\n"
    )
    assert _heavy_after(code, tmp_path) == []


def test_the_public_names_load_on_first_use():
    """`crosscheck.thevenin` and friends still resolve (loaded lazily) and are the modules' own objects."""
    import crosscheck

    assert crosscheck.thevenin is thevenin
    with pytest.raises(AttributeError):
        _ = crosscheck.no_such_name  # type: ignore[attr-defined]


def _general_path(network, port, freqs, *, sparse_lu: bool):
    """The same equivalents with the small path switched off: through ``MnaSystem``'s batched dense solve,
    or (``sparse_lu``) through its sparse LU (KLU or SuperLU) with the condition estimate."""
    import crosscheck.own.solver as solver

    limits = small.SMALL_LIMIT, solver.DENSE_LIMIT
    small.SMALL_LIMIT = -1
    solver.DENSE_LIMIT = -1 if sparse_lu else solver.DENSE_LIMIT
    try:
        return thevenin(network, port, freqs)
    finally:
        small.SMALL_LIMIT, solver.DENSE_LIMIT = limits


def _close(a: complex | None, b: complex | None, rel: float, scale: float = 0.0) -> bool:
    """Within ``rel`` of the larger value, or of ``scale`` (normwise: a value that is zero to rounding is
    compared against the size of the solution it came from)."""
    if a is None or b is None:
        return a is b
    return abs(a - b) <= rel * max(abs(a), abs(b), scale, 1e-300)


#: The fuzzer's default draws (every kind, through ``assembly.entries``) and networks of R, C, L and V only
#: (written directly by ``small._direct_entries``), up to 20 nodes.
KNOBS = {"all-kinds": Knobs(), "rclv-direct": Knobs(min_nodes=2, max_nodes=20, kinds="RCLV")}


@pytest.mark.parametrize("knobs", list(KNOBS))
@pytest.mark.parametrize("sparse_lu", [False, True], ids=["vs-solver-dense", "vs-sparse-lu"])
@pytest.mark.parametrize("index", range(30))
def test_dense_and_sparse_paths_agree_on_random_small_networks(index, sparse_lu, knobs):
    """On the fuzzer's random small networks the small path gives the general path's equivalents.

    Tolerances: against ``solver``'s batched dense solve (the same LAPACK arithmetic, duplicate entries
    summed in another order) 1e-12 relative (normwise: against the solution's size where a value is
    zero to rounding), and the same exact condition number to 1e-9. Against sparse
    LU (another pivot order) 1e-12 relative or 100·κ₁·ε where the matrix is ill-conditioned (the fuzzer
    draws such networks on purpose): two backward-stable solves differ by about κ·ε, not less.
    """
    case = generate_case(case_seed(77, index), KNOBS[knobs])
    if knobs == "rclv-direct":
        assert case.network.element_arrays.of_kind(small._DIRECT_KINDS).all()
    try:
        dense = thevenin(case.network, case.port, case.freqs_hz)
    except ArithmeticError as exc:  # a singular network: the general path must say the same
        with pytest.raises(type(exc)):
            _general_path(case.network, case.port, case.freqs_hz, sparse_lu=sparse_lu)
        return
    other = _general_path(case.network, case.port, case.freqs_hz, sparse_lu=sparse_lu)
    for d, s in zip(dense, other, strict=True):
        rel = max(1e-12, 100 * d.condition * np.finfo(float).eps) if sparse_lu else 1e-12
        zth = abs(d.zth) if d.zth else math.inf
        scales = {"vth": d.vth_scale, "zth": d.zth_scale, "in_": d.vth_scale / zth, "yn": 0.0}
        for q, scale in scales.items():
            assert _close(getattr(d, q), getattr(s, q), rel, scale), (q, getattr(d, q), getattr(s, q), d.condition)
        if not sparse_lu:
            assert abs(d.condition - s.condition) <= 1e-9 * s.condition, (d.condition, s.condition)
        assert d.note == s.note


def test_the_small_path_is_taken_and_the_sparse_one_is_not_loaded_for_it(monkeypatch):
    """A small network's sweep never builds an ``MnaSystem`` (the general path is where it goes only
    when the dense solve hands it back)."""
    from crosscheck.model.netlist import read_netlist
    from crosscheck.model.network import Port

    network = read_netlist(NETLIST)
    calls = []
    monkeypatch.setattr(equivalent, "_check_memory", lambda *a: calls.append(a))
    import crosscheck.own.solver as solver

    monkeypatch.setattr(solver, "MnaSystem", lambda *a, **k: calls.append(a) or pytest.fail("general path taken"))
    eqs = thevenin(network, Port("n4", "0"), [1e3, 1e4, 1e5])
    assert len(eqs) == 3 and calls == []


def test_small_graph_parts_number_as_scipy_does():
    """``connected_parts``' small-graph walk gives scipy's count and labels exactly, on random graphs."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import connected_components

    rng = np.random.default_rng(5)
    for _ in range(300):
        n = int(rng.integers(1, 65)) if rng.random() < 0.9 else int(rng.integers(65, SMALL_GRAPH + 1))
        m = int(rng.integers(0, 2 * n))
        a, b = rng.integers(0, n, m), rng.integers(0, n, m)
        count, labels = _small_parts(a.tolist(), b.tolist(), n)
        want, want_labels = connected_components(
            csr_matrix((np.ones(m), (a, b)), shape=(n, n)), directed=True, connection="weak"
        )
        assert count == want
        assert labels.tolist() == want_labels.tolist()

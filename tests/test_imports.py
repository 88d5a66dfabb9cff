"""Import hygiene: the solver stays light, PySpice stays behind one module, the public API is checked."""

from __future__ import annotations

import subprocess
import sys

import crosscheck


def _modules_after(statement: str) -> set[str]:
    code = f"import sys; {statement}; print('\\n'.join(sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    return set(out.split())


def test_solver_imports_neither_pyspice_nor_pandas():
    """Importing the solver and equivalents must not pull in PySpice or pandas."""
    loaded = _modules_after("import crosscheck.own.equivalent, crosscheck.own.solver")
    assert not any(m == "PySpice" or m.startswith("PySpice.") for m in loaded)
    assert "pandas" not in loaded


def test_import_crosscheck_does_not_load_pyspice():
    """`import crosscheck` works without ngspice: PySpice is imported only inside reference's functions."""
    loaded = _modules_after("import crosscheck, crosscheck.model.netlist, crosscheck.model.cases, crosscheck.run.check")
    assert not any(m == "PySpice" or m.startswith("PySpice.") for m in loaded)


def test_only_reference_imports_pyspice():
    """No module but reference (and the worker it runs in) names PySpice."""
    from pathlib import Path

    root = Path(crosscheck.__file__).parent
    offenders = [p.relative_to(root).as_posix() for p in root.rglob("*.py")
                 if "import PySpice" in p.read_text() or "from PySpice" in p.read_text()]
    assert offenders == ["spice/engine.py"]


def test_public_api_matches_all():
    """Every name in __all__ exists, and every public re-export is listed (Hypothesis-style checked __all__)."""
    for name in crosscheck.__all__:
        assert hasattr(crosscheck, name), name
    exported = {n for n, v in vars(crosscheck).items()
                if not n.startswith("_") and not isinstance(v, type(crosscheck)) and n != "annotations"}
    assert exported == set(crosscheck.__all__)
    assert sorted(crosscheck.__all__) == list(crosscheck.__all__)


def test_errors_derive_from_builtins():
    """Every crosscheck error also derives from the built-in it resembles."""
    assert issubclass(crosscheck.NetlistError, ValueError)
    assert issubclass(crosscheck.SingularNetworkError, ArithmeticError)
    assert issubclass(crosscheck.ReferenceEngineError, RuntimeError)
    assert issubclass(crosscheck.CaseFileError, ValueError)
    for name in crosscheck.__all__:
        obj = getattr(crosscheck, name)
        if isinstance(obj, type) and issubclass(obj, Exception) and obj is not crosscheck.CrosscheckError:
            assert issubclass(obj, crosscheck.CrosscheckError), name
            assert obj.__doc__, f"{name} needs a docstring saying cause and fix"


def test_every_exception_class_in_the_package_derives_from_the_root():
    """Every exception the package defines, public or private, is a CrosscheckError (and so catchable as one)."""
    import importlib
    import inspect
    from pathlib import Path

    root = Path(crosscheck.__file__).parent
    strays = []
    for path in sorted(root.rglob("*.py")):
        if path.name == "__main__.py":
            continue
        name = ".".join(path.relative_to(root.parent).with_suffix("").parts).removesuffix(".__init__")
        module = importlib.import_module(name)
        for cls_name, cls in vars(module).items():
            if inspect.isclass(cls) and issubclass(cls, BaseException) and cls.__module__ == name:
                if not issubclass(cls, crosscheck.CrosscheckError):
                    strays.append(f"{name}.{cls_name}")
    assert not strays, f"derive these from CrosscheckError (and a built-in): {strays}"

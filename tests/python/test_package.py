"""The package's stubs and docstrings keep step with its functions, so help()
and editors show every parameter."""

import ast
import inspect
import os

import paritas

STUBS = os.path.join(os.path.dirname(paritas.__file__), "__init__.pyi")


def stub_functions():
    with open(STUBS, encoding="utf-8") as f:
        tree = ast.parse(f.read())
    return {n.name: n for n in tree.body if isinstance(n, ast.FunctionDef)}


def test_every_public_function_has_a_stub_with_its_parameters():
    stubs = stub_functions()
    for name in ["check", "compute", "pair", "deflate", "sensitivity", "compare", "read_table"]:
        stub = stubs[name]
        listed = {a.arg for a in stub.args.args + stub.args.kwonlyargs}
        real = inspect.signature(getattr(paritas, name)).parameters.values()
        missing = [p.name for p in real
                   if p.kind != inspect.Parameter.VAR_KEYWORD and p.name not in listed]
        assert missing == [], f"{name}: {missing}"


def test_every_public_function_has_a_docstring_with_its_arguments():
    for name in ["check", "compute", "pair", "deflate", "sensitivity", "compare"]:
        doc = inspect.getdoc(getattr(paritas, name))
        assert doc and "Args:" in doc, name


def test_exception_classes():
    assert issubclass(paritas.InvalidInput, paritas.ParitasError)
    assert issubclass(paritas.ComputationFailed, paritas.ParitasError)
    assert not issubclass(paritas.InvalidInput, paritas.ComputationFailed)

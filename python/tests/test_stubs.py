"""The type stubs name every function, class and argument the module has, in order."""
import ast
import inspect
from pathlib import Path

import causeway

STUBS = ast.parse((Path(__file__).parents[1] / "causeway.pyi").read_text())


def stub_args(fn):
    return [a.arg for a in fn.args.args + fn.args.kwonlyargs if a.arg not in ("self", "cls")]


def runtime_args(obj):
    return [p for p in inspect.signature(obj).parameters if p not in ("self", "cls", "$self")]


def test_functions_match_the_stubs():
    defs = {n.name: n for n in STUBS.body if isinstance(n, ast.FunctionDef)}
    public = {k for k, v in vars(causeway).items() if callable(v) and not isinstance(v, type)}
    assert set(defs) == public
    for name, fn in defs.items():
        assert stub_args(fn) == runtime_args(getattr(causeway, name)), name


def test_classes_match_the_stubs():
    classes = {n.name: n for n in STUBS.body if isinstance(n, ast.ClassDef)}
    assert set(classes) == {k for k, v in vars(causeway).items() if isinstance(v, type)}
    for cname, cls in classes.items():
        runtime = getattr(causeway, cname)
        for fn in (n for n in cls.body if isinstance(n, ast.FunctionDef)):
            if fn.name == "__init__":
                assert stub_args(fn) == runtime_args(runtime), cname
            elif any(isinstance(d, ast.Name) and d.id == "property" for d in fn.decorator_list):
                assert isinstance(inspect.getattr_static(runtime, fn.name), type(causeway.Map.width)), fn.name
            elif not fn.name.startswith("__"):
                assert stub_args(fn) == runtime_args(getattr(runtime, fn.name)), f"{cname}.{fn.name}"

"""Every public function of the core documents its parameters (after python-control's docstrings_test.py).

For each public function (module ``__all__``) and each public method of a public
class in workbench.waveforms, workbench.models, workbench.analysis (and
workbench.materials when present) the numpydoc ``Parameters`` section must list
every argument of the signature. In workbench.models each entry must also carry
its unit in brackets, and each function must have ``Notes`` and ``References``
sections (house style: DEVELOPERS.md).
"""
from __future__ import annotations

import importlib
import inspect
import re

import pytest

CORE_MODULES = [
    "workbench.waveforms",
    "workbench.models.loops",
    "workbench.models.steinmetz",
    "workbench.models.separation",
    "workbench.analysis.breakdown",
    "workbench.analysis.sweep",
    "workbench.analysis.shapes",
    "workbench.analysis.compare",
    "workbench.analysis.thermal",
    "workbench.materials",
    "workbench.engine",
    "workbench.shapes",
    "workbench.models.bias",
    "workbench.models.thermal",
    "workbench.models.batch",
]
MODEL_MODULES = {"workbench.models.loops", "workbench.models.steinmetz", "workbench.models.separation",
                 "workbench.models.bias", "workbench.models.thermal"}

SECTION = re.compile(r"^(?P<title>[A-Z][A-Za-z ]+)\n-{3,}\s*$", re.M)


def sections(doc: str) -> dict[str, str]:
    """numpydoc sections of a docstring: title -> body text."""
    doc = inspect.cleandoc(doc)
    marks = list(SECTION.finditer(doc))
    out = {}
    for i, m in enumerate(marks):
        end = marks[i + 1].start() if i + 1 < len(marks) else len(doc)
        out[m.group("title").strip()] = doc[m.end():end]
    return out


def parameter_entries(body: str) -> dict[str, str]:
    """Parameter names -> description text, from a Parameters section body.

    An entry starts at column 0 with ``name : type`` or ``a, b : type`` (or just ``name``);
    its description is the indented text below.
    """
    entries: dict[str, str] = {}
    current: list[str] = []
    for line in body.splitlines():
        if line and not line[0].isspace():
            head = line.split(" : ")[0]
            current = [n.strip().lstrip("*") for n in head.split(",") if n.strip()]
            for name in current:
                entries[name] = line.split(" : ", 1)[1] if " : " in line else ""
        elif line.strip():
            for name in current:
                entries[name] += " " + line.strip()
    return entries


def public_callables():
    for modname in CORE_MODULES:
        try:
            mod = importlib.import_module(modname)
        except ModuleNotFoundError:  # pragma: no cover - materials not yet present
            continue
        # names in __all__ plus every function or class defined in the module without a leading underscore
        names = set(getattr(mod, "__all__", []))
        names |= {n for n, o in vars(mod).items()
                  if not n.startswith("_") and (inspect.isfunction(o) or inspect.isclass(o))
                  and getattr(o, "__module__", None) == modname}
        for name in sorted(names):
            obj = getattr(mod, name)
            if inspect.isfunction(obj):
                yield modname, name, obj
            elif inspect.isclass(obj) and obj.__module__ == modname:
                for attr, member in vars(obj).items():
                    if attr.startswith("_") or not inspect.isfunction(member):
                        continue
                    yield modname, f"{name}.{attr}", member


CALLABLES = sorted(public_callables(), key=lambda x: (x[0], x[1]))


def signature_params(func) -> list[str]:
    params = []
    for p in inspect.signature(func).parameters.values():
        if p.name in ("self", "cls"):
            continue
        params.append(p.name)
    return params


@pytest.mark.parametrize("modname, qualname, func", CALLABLES, ids=[f"{m}:{q}" for m, q, _ in CALLABLES])
def test_parameters_are_documented(modname, qualname, func):
    params = signature_params(func)
    doc = inspect.getdoc(func)
    assert doc, f"{modname}.{qualname} has no docstring"
    if not params:
        return
    secs = sections(doc)
    assert "Parameters" in secs, f"{modname}.{qualname} has no Parameters section"
    documented = parameter_entries(secs["Parameters"])
    missing = [p for p in params if p not in documented]
    assert not missing, f"{modname}.{qualname}: undocumented parameters {missing}"
    extra = [p for p in documented if p not in params and not p.startswith("*")]
    assert not extra, f"{modname}.{qualname}: documents parameters not in the signature {extra}"


MODEL_CALLABLES = [c for c in CALLABLES if c[0] in MODEL_MODULES]


@pytest.mark.parametrize("modname, qualname, func", MODEL_CALLABLES, ids=[f"{m}:{q}" for m, q, _ in MODEL_CALLABLES])
def test_model_functions_give_units_equation_and_references(modname, qualname, func):
    secs = sections(inspect.getdoc(func))
    for title in ("Notes", "References"):
        assert title in secs and secs[title].strip(), f"{modname}.{qualname} lacks a {title} section"
    # every reference names a year
    assert re.search(r"(18|19|20)\d\d", secs["References"]), f"{modname}.{qualname}: reference without a year"
    entries = parameter_entries(secs.get("Parameters", ""))
    no_unit = [name for name, text in entries.items() if not re.search(r"\[[^\]]+\]", text)]
    assert not no_unit, f"{modname}.{qualname}: parameters without a unit in brackets {no_unit}"


def test_parser_catches_an_undocumented_parameter():
    # the checker itself must be able to fail
    def sample(freq, b_peak):
        """Doc.

        Parameters
        ----------
        freq : float
            Frequency [Hz].
        """

    secs = sections(inspect.getdoc(sample))
    documented = parameter_entries(secs["Parameters"])
    assert [p for p in signature_params(sample) if p not in documented] == ["b_peak"]
    assert re.search(r"\[[^\]]+\]", documented["freq"])

"""The public Python API: ``planner.__all__`` lists what a script needs, every name imports and says
what it is, and ``import planner`` (and ``planner --help``) stay light."""

from __future__ import annotations

import inspect
import subprocess
import sys

import pytest

import planner

#: Public names whose docstring is still missing (a dataclass without one shows only its generated
#: signature). Empty this as they get one; the test then holds the API to it.
UNDOCUMENTED: frozenset[str] = frozenset()

#: Modules a light import must not pull in (each costs a second or more, or starts threads).
HEAVY = ("dask", "distributed", "matplotlib", "stim", "sinter", "pymatching", "scipy")


def _own_docstring(obj: object) -> str:
    """The docstring ``obj`` defines itself: not inherited, not a dataclass's generated signature."""
    if inspect.isclass(obj) and "__doc__" not in vars(obj):
        return ""
    doc = inspect.cleandoc(getattr(obj, "__doc__", None) or "")
    if doc.startswith(f"{getattr(obj, '__name__', '')}("):
        return ""
    return doc


def test_all_is_the_lazy_table_sorted_within_no_duplicates() -> None:
    assert len(planner.__all__) == len(set(planner.__all__))
    assert set(planner.__all__) == set(planner._HOME)
    assert "__version__" not in planner.__all__ and planner.__version__


@pytest.mark.parametrize("name", planner.__all__)
def test_every_public_name_imports_and_is_documented(name: str) -> None:
    obj = getattr(planner, name)
    assert obj is getattr(__import__(planner._HOME[name], fromlist=[name]), name)
    if inspect.isclass(obj) or inspect.isroutine(obj):
        if name in UNDOCUMENTED:
            assert not _own_docstring(obj), f"{name} has a docstring now: remove it from UNDOCUMENTED"
            pytest.xfail(f"{name} has no docstring yet (UNDOCUMENTED in {__name__})")
        assert _own_docstring(obj), f"{name} ({planner._HOME[name]}) has no docstring"
    else:  # a constant: the package docstring says what it is
        assert f"``{name}``" in (planner.__doc__ or ""), f"{name} is not described in planner's docstring"


def test_star_import_gives_the_api() -> None:
    space: dict[str, object] = {}
    exec("from planner import *", space)  # noqa: S102 - the statement under test
    assert set(planner.__all__) <= set(space)


def test_unknown_name_is_an_attribute_error() -> None:
    with pytest.raises(AttributeError, match="no attribute 'nope'"):
        planner.nope  # noqa: B018
    assert set(planner.__all__) <= set(dir(planner))


def _heavy_after(code: str) -> list[str]:
    probe = (f"import sys\n{code}\n"
             f"print(sorted({{m.split('.')[0] for m in sys.modules}} & {set(HEAVY)!r}))")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    return eval(done.stdout.strip().splitlines()[-1])  # noqa: S307 - our own print of a list


def test_import_planner_is_light() -> None:
    assert _heavy_after("import planner; planner.__all__") == []


def test_help_imports_neither_dask_nor_matplotlib() -> None:
    code = ("sys.argv = ['planner', '--help']\nfrom planner.cli import main\n"
            "try:\n    main()\nexcept SystemExit as e:\n    assert e.code in (0, None), e.code\n")
    assert not set(_heavy_after(code)) & {"dask", "distributed", "matplotlib"}

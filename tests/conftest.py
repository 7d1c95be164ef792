"""Shared fixtures and the ``slow`` rule.

Sampled out directories are expensive (stim + pymatching through sinter), so each distinct
configuration is sampled once per session by ``sample_once`` (see :mod:`tests.helpers.sampled`)
and shared between the modules that ask for it; a test that writes into one works on a copy
(:func:`tests.helpers.sampled.copy_out`).

A test that uses ``sample_once`` (directly or through another fixture) is marked ``slow``
here, so ``make test-fast`` (``-m "not slow"``) never samples; tests that sample inline carry the
mark themselves. ``make test`` runs everything.
"""

from __future__ import annotations

import pytest

from tests.helpers.sampled import SampleOnce


@pytest.fixture(scope="session")
def sample_once(tmp_path_factory: pytest.TempPathFactory) -> SampleOnce:
    """``sample_once(toml, budget=... | rule=..., workers=..., out_name=...) -> Sampled``."""
    return SampleOnce(tmp_path_factory.mktemp("sampled"))


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    for item in items:
        if "sample_once" in getattr(item, "fixturenames", ()) and item.get_closest_marker("slow") is None:
            item.add_marker(pytest.mark.slow)

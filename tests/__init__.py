"""planner's tests, laid out like the package.

``tests/<stage>/`` holds the tests of ``planner/<stage>`` (cli, sampling, store, planning, reports);
the single-module stages (config, noise, circuits, sweep, fits) and the whole-package checks (the
public API, the structure, packaging, the example, the published threshold) sit at the top.
``helpers/`` holds test-only code (synthetic counts of known truth, shared sampled out
directories); ``conftest.py`` the session fixtures and the ``slow`` rule.
"""

"""A fast start: the command line's parser and ``import auditmean`` load no scientific stack.

Speed itself is measured by tests/benchmarks/bench_startup.py (never asserted
here); these tests check what makes it fast and that nothing was lost on the
way: ``--help`` lists every subcommand with its description, building the
parser imports neither numpy, scipy nor pandas (checked in a fresh
interpreter), ``auditmean``'s public names still resolve, and the quantiles
now taken from ``scipy.special`` equal those of ``scipy.stats``.
"""

from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats

import auditmean
from auditmean.cli import SUBCOMMANDS, build_parser

HEAVY = ("numpy", "scipy", "pandas", "pyarrow", "duckdb", "plotly")


def _fresh(code: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)


def _loaded_after(code: str) -> list[str]:
    """The heavy packages in sys.modules after ``code`` runs in a fresh interpreter."""
    probe = f"{code}\nimport json, sys\nprint(json.dumps([m for m in {HEAVY!r} if m in sys.modules]))"
    done = _fresh(probe)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_help_lists_every_subcommand_with_a_description():
    env = {**os.environ, "COLUMNS": "100"}
    done = subprocess.run([sys.executable, "-m", "auditmean", "--help"], capture_output=True, text=True,
                          timeout=120, env=env)
    assert done.returncode == 0, done.stderr
    described = {}
    lines = done.stdout.splitlines()
    for i, line in enumerate(lines):
        # argparse's list of subcommands: the name indented by four, then its help on the same
        # line after two or more spaces, or on the next line when the name is long
        m = re.match(r"^    ([\w-]+)(?:\s{2,}(\S.*))?$", line)
        if m:
            described[m.group(1)] = m.group(2) or (lines[i + 1].strip() if i + 1 < len(lines) else "")
    assert set(SUBCOMMANDS) <= set(described), f"missing from --help: {set(SUBCOMMANDS) - set(described)}"
    for name in SUBCOMMANDS:
        assert len(described[name].split()) >= 3, f"{name}: {described[name]!r} is not a description"


def test_every_subcommand_help_builds():
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "command")
    assert list(sub.choices) == list(SUBCOMMANDS)
    for name, p in sub.choices.items():
        text = p.format_help()
        assert text.startswith(f"usage: auditmean {name}"), name


def test_building_the_parser_imports_no_scientific_stack():
    assert _loaded_after("from auditmean.cli import build_parser\nbuild_parser()") == []


def test_import_auditmean_imports_no_scientific_stack():
    assert _loaded_after("import auditmean\nauditmean.__version__") == []


def test_a_public_name_loads_only_what_it_needs():
    # an error type needs nothing heavy; a plan needs numpy and pandas
    assert _loaded_after("from auditmean import InputError") == []
    assert {"numpy", "pandas"} <= set(_loaded_after("from auditmean import plan_sample"))


def test_every_public_name_resolves():
    for name in auditmean.__all__:
        assert getattr(auditmean, name) is not None, name
    assert set(auditmean.__all__) <= set(dir(auditmean))
    from auditmean import Engagement, second_opinion
    from auditmean.engagement import Engagement as FromModule
    from auditmean.evaluation import second_opinion as function

    assert Engagement is FromModule and second_opinion is function
    with pytest.raises(AttributeError, match="no attribute 'no_such_name'"):
        auditmean.no_such_name  # noqa: B018


def test_demo_settings_still_importable_as_a_constant():
    from auditmean.cli.demo import DEMO_SETTINGS, demo_settings
    from auditmean.plan import MisstatementPattern

    assert DEMO_SETTINGS["seed"] == demo_settings()["seed"]
    assert isinstance(DEMO_SETTINGS["plan"]["std_dev_source"], MisstatementPattern)


# --- the quantiles: scipy.special gives scipy.stats' values -----------------------------------


@pytest.mark.parametrize("confidence", [0.5, 0.8, 0.9, 0.95, 0.975, 0.99, 0.999])
@pytest.mark.parametrize("sides", ["two-sided", "upper"])
def test_critical_values_equal_scipy_stats(confidence, sides):
    from auditmean.core.intervals import critical_value

    p = 1 - (1 - confidence) / 2 if sides == "two-sided" else confidence
    # Outside reference: scipy.stats.norm.ppf and scipy.stats.t.ppf (general-purpose library)
    assert critical_value(confidence, sides) == stats.norm.ppf(p)
    for df in (1, 2.5, 7, 29, 30.75, 199, 10_000):
        assert critical_value(confidence, sides, "t", df) == stats.t.ppf(p, df)
    assert critical_value(confidence, sides, "t", math.inf) == stats.norm.ppf(p)


def test_sizing_and_simulation_quantiles_equal_scipy_stats():
    from auditmean.core import simulation, sizing

    for risk in (0.01, 0.05, 0.10, 0.2, 0.3):
        # Outside reference: scipy.stats.norm.ppf
        assert sizing.z_acceptance(risk) == stats.norm.ppf(1 - risk)
        assert sizing.z_rejection(risk) == stats.norm.ppf(1 - risk / 2)
    df = np.array([0.0, 1.0, 3.5, 12.0, np.nan, 40.0])
    settings = simulation.Settings(confidence=0.9, distribution="t")
    got = simulation._critical(settings, df, two_sided=True)
    expected = np.where(np.isfinite(df) & (df > 0), stats.t.ppf(0.95, np.where(df > 0, df, 1)), stats.norm.ppf(0.95))
    assert np.array_equal(got, expected)


def test_normal_curve_of_the_coverage_picture_equals_scipy_stats():
    from auditmean.coverage_plots import _normal_density

    x = np.linspace(-2e6, 4e6, 401)
    # Outside reference: scipy.stats.norm.pdf, to the last bits (1e-15 relative)
    np.testing.assert_allclose(_normal_density(x, 1.2e6, 3.1e5), stats.norm.pdf(x, loc=1.2e6, scale=3.1e5), rtol=1e-15)

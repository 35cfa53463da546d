"""Size and bookkeeping of the bundled catalogue (issue 20).

At least 70 spacetimes in at least 120 charts are bundled; every entry cites its sources; every
parameter has a default, and the validation (which checks each default against the parameter's
range and assumptions) accepts every file. Whether each chart passes its checks is the business of
the bundled-checks test, not of this one.
"""

from __future__ import annotations

import copy

import pytest

from gravicat.format.bundled import bundled_files, read_bundled
from gravicat.format.metricfile import decode_toml, validate

MIN_SPACETIMES = 70  # issue 20, "Done when"
MIN_CHARTS = 120


@pytest.fixture(scope="module")
def documents():
    return [read_bundled(path) for path in bundled_files()]


def test_catalogue_has_at_least_70_spacetimes_in_120_charts(documents):
    ids = [doc.id for doc in documents]
    assert len(set(ids)) == len(ids), "two bundled files share an id"
    assert len(ids) >= MIN_SPACETIMES
    assert sum(len(doc.chart_names) for doc in documents) >= MIN_CHARTS


def test_every_entry_cites_its_sources(documents):
    for doc in documents:
        refs = doc.data.get("references") or []
        assert refs, f"{doc.source}: no references"
        for ref in refs:
            assert len(ref["citation"].strip()) >= 10, f"{doc.source}: citation too short: {ref}"


def test_every_parameter_has_a_default_inside_its_range(documents):
    for doc in documents:
        for name, par in doc.data.get("parameters", {}).items():
            assert "default" in par, f"{doc.source}: parameter {name} has no default"
            assert "range" in par, f"{doc.source}: parameter {name} has no range"


def test_validation_refuses_a_default_outside_its_range():
    """The check above relies on the validation: show it bites on a bundled file made wrong."""
    path = next(p for p in bundled_files() if p.name == "kerr.toml")
    raw = copy.deepcopy(decode_toml(path).data)
    raw["parameters"]["a"]["default"] = "3/2"  # range 0 <= a <= M with M = 1
    from gravicat.errors import InputError

    with pytest.raises(InputError) as err:
        validate(raw, "bundled:kerr.toml")
    assert "parameters.a" in str(err.value)

"""The bundled reference catalogue: coverage, references, and exact round trips through the store."""

from __future__ import annotations

import json

import pytest
from sqlalchemy.orm import Session

from gravicat.format.metricfile import build_chart, decode_toml, validate
from gravicat.store import db
from gravicat.store import revisions as store

FILES = store.bundled_files()
DOCS = {path.name: validate(decode_toml(path).data, str(path)) for path in FILES}


def test_catalogue_size_and_required_spacetimes():
    ids = {d.id for d in DOCS.values()}
    charts = sum(len(d.chart_names) for d in DOCS.values())
    assert len(ids) == len(DOCS) >= 25, sorted(ids)
    assert charts >= 40
    required = {"minkowski", "schwarzschild", "reissner-nordstrom", "kerr", "kerr-newman", "de-sitter",
                "anti-de-sitter", "schwarzschild-de-sitter", "flrw-open", "flrw-flat", "flrw-closed",
                "einstein-static", "godel", "kasner", "vaidya", "taub-nut", "bertotti-robinson", "melvin",
                "alcubierre"}
    assert required <= ids, sorted(required - ids)
    assert {"cartesian", "spherical", "rindler", "milne"} <= set(DOCS["minkowski.toml"].chart_names)
    assert {"schwarzschild", "ingoing-eddington-finkelstein", "painleve-gullstrand", "isotropic"} <= set(
        DOCS["schwarzschild.toml"].chart_names)
    assert {"boyer-lindquist", "kerr-schild"} <= set(DOCS["kerr.toml"].chart_names)


@pytest.mark.parametrize("name", sorted(DOCS))
def test_each_entry_cites_and_builds(name):
    doc = DOCS[name]
    assert name == f"{doc.id}.toml"
    assert len(doc.data["references"]) >= 2, "cite the original paper and a textbook"
    assert doc.data["summary"] and doc.data["tags"]
    for pname, param in doc.data["parameters"].items():
        assert param["description"], pname
    for chart in doc.chart_names:
        spec = build_chart(doc, chart)
        n = len(spec.coords)
        assert spec.metric.shape == (n, n)
    for lim in doc.data["limits"].values():
        target_entry, target_chart = lim["reduces-to"].split(":")
        target = DOCS.get(f"{target_entry}.toml")
        assert target is not None and target_chart in target.chart_names, lim["reduces-to"]


def test_round_trip_file_store_json_hash(db_url, tmp_path):
    """file -> store -> canonical JSON export -> the identical hash, for every bundled file."""
    from gravicat.format.metricfile import decode_json
    from gravicat.plugins.json_export import JsonExporter

    engine = db.make_engine(db_url)
    db.ensure_schema(engine, may_upgrade=True, may_create=True)
    with Session(engine) as session, session.begin():
        for doc in DOCS.values():
            assert store.add_document(session, doc, author="test").action == "new"
    with Session(engine) as session:
        for doc in DOCS.values():
            rev = store.revision(session, doc.id)
            assert rev.hash == doc.hash
            text = JsonExporter().export(store.document_of(rev), {"revision": rev.hash, "checks": []})
            out = tmp_path / f"{doc.id}.json"
            out.write_text(text)
            again = validate(decode_json(out).data, str(out))
            assert again.hash == doc.hash == json.loads(text)["revision"]
            assert again.data == doc.data

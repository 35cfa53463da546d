"""The one reader of the bundled reference catalogue (gravicat.format.bundled)."""

from __future__ import annotations

from gravicat.engine.runner import bundled_documents
from gravicat.format import bundled
from gravicat.store import revisions


def test_every_bundled_file_is_read_one_way_and_named_after_its_id():
    paths = bundled.bundled_files()
    assert paths and [p.name for p in paths] == sorted(p.name for p in paths)
    docs = list(bundled.iter_bundled_documents())
    assert len(docs) == len(paths)
    for path, doc in zip(paths, docs, strict=True):
        assert doc.id == path.stem and doc.source == f"bundled:{path.name}"
        assert bundled.bundled_path(doc.id) == path


def test_the_store_and_the_engine_use_the_same_reader():
    assert revisions.bundled_files is bundled.bundled_files
    assert revisions.iter_bundled_documents is bundled.iter_bundled_documents
    docs = bundled_documents()
    assert sorted(docs) == sorted(p.stem for p in bundled.bundled_files())
    assert docs["kerr"].hash == bundled.read_bundled(bundled.bundled_path("kerr")).hash


def test_a_lookup_by_id_cannot_leave_the_folder():
    for key in ("../kerr", "kerr/../kerr", "Kerr", "", "kerr.toml", "no-such-entry", None, 3):
        assert bundled.bundled_path(key) is None, key

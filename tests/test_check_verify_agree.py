"""`check FILE` and `add FILE` + `verify ID` give the same verdict on every check of every file.

Issue 13, item 8 and its self-consistency item: `check` reported a limit naming one of the user's
own catalogue entries as "skipped, not found" while `verify` of identical content reported
"fail". The two commands take different roads (a file read and checked in forked children per
chart, under a CPU cap; a stored canonical document verified in a process pool and read back from
the database), so this test runs both on every bundled file and every file in tests/data and
compares the status of every (chart, check). The reference is the other command: they must agree,
whatever the verdict (a file with a deliberately wrong claim must fail in both).

Speed: one catalogue holds every file; `verify --all --jobs 2` verifies it in one pool, and the
`check` commands run two at a time (each runs its charts in parallel children), so the whole
module costs about two verifications of the catalogue (a few tens of seconds on two cores). A file
whose id is already taken (by a bundled entry or another test file) is checked against a catalogue
of its own, where it is that entry.
"""

from __future__ import annotations

import json
import multiprocessing
from collections import defaultdict
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import pytest
from typer.testing import CliRunner

from gravicat.cli import app
from gravicat.format.metricfile import load_file
from gravicat.store import revisions as store

DATA = Path(__file__).parent / "data"
BUNDLED = store.bundled_files()
TEST_FILES = sorted(p for p in DATA.iterdir() if p.suffix.lower() in (".toml", ".json"))
FILES = [*BUNDLED, *TEST_FILES]


def _id(path: Path) -> str | None:
    try:
        return load_file(path).id
    except Exception:  # noqa: BLE001 - a deliberately malformed test file: both commands must refuse it
        return None


def _rounds() -> list[list[Path]]:
    """Round 0: the bundled catalogue (as `init` loads it) and every test file with an id of its own;
    then one round per test file whose id is taken, in a catalogue with the bundled entries and it."""
    taken = {_id(p) for p in BUNDLED}
    first, later = [], []
    for path in TEST_FILES:
        ident = _id(path)
        if ident is not None and ident in taken:
            later.append([path])
        else:
            first.append(path)
            taken.add(ident)
    return [first, *later]


class Catalogue:
    def __init__(self, folder: Path):
        self.url = f"sqlite:///{folder / 'catalogue.sqlite'}"
        self.runner = CliRunner()
        # nothing from the developer's own settings (the module fixture runs before the autouse one)
        self.env = {"GRAVICAT_CONFIG": str(folder / "no-config.toml"), "GRAVICAT_DB": None,
                    "GRAVICAT_DISABLE_PLUGINS": None, "GRAVICAT_AUTHOR": "Halcyon Reach test group"}

    def __call__(self, *args: str):
        return self.runner.invoke(app, ["--db", self.url, *args], env=self.env)

    def check(self, path: Path) -> tuple[int, str]:
        """``check PATH --json`` (in a pool worker): its exit code and standard output."""
        done = self("check", str(path), "--json")
        return done.exit_code, done.stdout


@pytest.fixture(scope="module")
def verdicts(tmp_path_factory):
    """path -> {"check": ..., "verify": ...}, each (exit or status, {(chart, check): (status, detail)})."""
    out = {}
    for k, extra in enumerate(_rounds()):
        cat = Catalogue(tmp_path_factory.mktemp(f"agree{k}"))
        made = cat("init", "--no-verify")  # the bundled catalogue, stored as a user's catalogue holds it
        assert made.exit_code == 0, made.output
        stored_ids = {}
        for path in extra:
            added = cat("add", str(path))
            stored_ids[path] = _id(path) if added.exit_code == 0 else None
            out[path] = {"add_exit": added.exit_code}
        verified = cat("verify", "--all", "--jobs", "2", "--json")
        assert verified.exit_code in (0, 1), verified.output
        entries = {e["metric"]: e for e in json.loads(verified.stdout)["entries"]}
        paths = (BUNDLED if k == 0 else []) + extra
        # two files at a time (forked workers; a file's own charts may fork again), largest first
        order = sorted(paths, key=lambda p: -p.stat().st_size)
        with ProcessPoolExecutor(max_workers=2, mp_context=multiprocessing.get_context("fork")) as pool:
            checks = dict(zip(order, pool.map(cat.check, order), strict=True))
        for path in paths:
            ident = _id(path) if path in BUNDLED else stored_ids[path]
            exit_code, stdout = checks[path]
            row = out.setdefault(path, {})
            row["check_exit"] = exit_code
            if exit_code == 2:  # refused as bad input: `add` must have refused it too
                row["check"] = None
            else:
                rep = json.loads(stdout)
                row["check"] = (rep["status"], {(c["chart"], r["check"]): (r["status"], r["detail"])
                                                for c in rep["charts"] for r in c["checks"]})
            if ident is None:
                row["verify"] = None
            else:
                entry = entries[ident]
                row["verify"] = (entry["status"], {(r["chart"], r["check"]): (r["status"], r["detail"])
                                                   for r in entry["checks"]})
    return out


def test_every_file_is_covered(verdicts):
    assert set(verdicts) == set(FILES)
    assert len(BUNDLED) >= 30 and any(p.name == "agree-scaled-rindler.toml" for p in TEST_FILES)


@pytest.mark.parametrize("path", FILES, ids=[f"{p.parent.name}/{p.name}" for p in FILES])
def test_check_and_verify_agree(verdicts, path):
    row = verdicts[path]
    if row["check"] is None or row["verify"] is None:  # bad input: refused by both, with exit 2
        assert row["check"] is None and row["verify"] is None, row
        assert row.get("check_exit") == 2 and row.get("add_exit", 2) == 2, row
        return
    (c_status, c_checks), (v_status, v_checks) = row["check"], row["verify"]
    assert set(c_checks) == set(v_checks), sorted(set(c_checks) ^ set(v_checks))
    differ = defaultdict(list)
    for key, (status, detail) in sorted(c_checks.items()):
        if status != v_checks[key][0]:
            differ[key].extend([f"check: {status}: {detail}", f"verify: {v_checks[key][0]}: {v_checks[key][1]}"])
    assert not differ, "\n".join(f"{k}: " + " | ".join(v) for k, v in differ.items())
    assert c_status == v_status
    assert row["check_exit"] == (1 if c_status in ("fail", "error") else 0)


def test_a_limit_naming_a_users_entry_is_proved_by_both(verdicts):
    """The test file's limit names halcyon-rindler, a user's entry (tests/data/rindler-demo.toml), not a
    bundled one: with s = 1 the rescaled chart is that Rindler chart (Rindler 2006, ch. 3)."""
    row = verdicts[DATA / "agree-scaled-rindler.toml"]
    for side in ("check", "verify"):
        status, detail = row[side][1][("rindler", "limits:unit-scale")]
        assert status == "pass", (side, detail)

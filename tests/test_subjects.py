"""One subject syntax (``FILE[:CHART]`` or ``ID[@REVISION][:CHART]``) read the same by every command."""

from __future__ import annotations

import json
import shutil

import pytest

from gravicat.api.subjects import parse_subject
from gravicat.errors import InputError
from gravicat.store.revisions import bundled_files

SCHWARZSCHILD = next(f for f in bundled_files() if f.name == "schwarzschild.toml")


def one_error_line(result) -> str:
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    return lines[0]


# --------------------------------------------------------------------------- the parser


@pytest.mark.parametrize("text, entry, revision, chart", [
    ("kerr", "kerr", None, None),
    ("kerr@3f2a", "kerr", "3f2a", None),
    ("kerr@2", "kerr", "2", None),
    ("kerr:boyer-lindquist", "kerr", None, "boyer-lindquist"),
    ("kerr@3f2a:boyer-lindquist", "kerr", "3f2a", "boyer-lindquist"),
    ("kerr-newman-de-sitter", "kerr-newman-de-sitter", None, None),
    ("  kerr  ", "kerr", None, None),
])
def test_entry_forms(text, entry, revision, chart):
    ref = parse_subject(text)
    assert not ref.is_file
    assert (ref.entry, ref.revision, ref.chart) == (entry, revision, chart)


@pytest.mark.parametrize("text", ["", "   ", "Kerr", "kerr@", "kerr:", "kerr@@1", "kerr@1@2", "kerr:a:b",
                                  "@1", ":chart", "kerr@1-2", "ke rr"])
def test_malformed_subjects_are_one_line_input_errors(text):
    with pytest.raises(InputError) as err:
        parse_subject(text)
    assert "\n" not in str(err.value)
    assert "ID[@REVISION][:CHART]" in str(err.value) or "empty" in str(err.value)


def test_existing_file_with_and_without_chart(tmp_path):
    path = tmp_path / "metric.toml"
    path.write_text("")
    ref = parse_subject(str(path))
    assert ref.is_file and ref.path == path and ref.chart is None
    ref = parse_subject(f"{path}:schwarzschild")
    assert ref.is_file and ref.path == path and ref.chart == "schwarzschild"


def test_a_path_containing_a_colon_is_the_file_when_it_exists(tmp_path):
    odd = tmp_path / "a:b.toml"
    odd.write_text("")
    assert parse_subject(str(odd)).path == odd
    assert parse_subject(f"{odd}:isotropic").chart == "isotropic"


@pytest.mark.parametrize("text, path, chart", [
    ("missing.toml", "missing.toml", None),            # a file by its suffix (then: no such file)
    ("missing.JSON", "missing.JSON", None),
    ("missing.toml:bl", "missing.toml", "bl"),
    ("dir/metric", "dir/metric", None),                 # a slash is never in an entry id
    ("./kerr", "kerr", None),
    ("C:/data/kerr.toml", "C:/data/kerr.toml", None),   # a drive letter is not a chart separator
    ("C:/data/kerr.toml:boyer-lindquist", "C:/data/kerr.toml", "boyer-lindquist"),
    ("C:\\data\\kerr.toml", "C:\\data\\kerr.toml", None),
])
def test_file_forms_that_do_not_exist(text, path, chart):
    ref = parse_subject(text)
    assert ref.is_file and str(ref.path) == str(__import__("pathlib").Path(path)) and ref.chart == chart


def test_options_agree_with_the_subject():
    assert parse_subject("kerr", chart="bl").chart == "bl"
    assert parse_subject("kerr:bl", chart="bl").chart == "bl"
    assert parse_subject("kerr", revision="3").revision == "3"
    with pytest.raises(InputError, match="names chart 'bl' but --chart is 'ks'"):
        parse_subject("kerr:bl", chart="ks")
    with pytest.raises(InputError, match="names revision '1' but --revision is '2'"):
        parse_subject("kerr@1", revision="2")
    with pytest.raises(InputError, match="--revision: applies to catalogue entries"):
        parse_subject("kerr.toml", revision="2")


# --------------------------------------------------------------------------- every command reads it the same way


@pytest.fixture
def stored(empty_catalogue, tmp_path):
    """A catalogue holding the bundled Schwarzschild entry twice (revisions 1 and 2), and a copy of its file."""
    cli = empty_catalogue
    copy = tmp_path / "schwarzschild.toml"
    shutil.copy(SCHWARZSCHILD, copy)
    assert cli("add", str(copy)).exit_code == 0
    text = copy.read_text().replace('title = "', 'title = "The ', 1)
    copy.write_text(text)
    r = cli("add", str(copy))
    assert r.exit_code == 0, r.output
    return cli, copy


def _hashes(cli) -> list[str]:
    r = cli("history", "schwarzschild", "--json")
    assert r.exit_code == 0, r.output
    return [row["hash"] for row in sorted(json.loads(r.stdout)["revisions"], key=lambda x: x["number"])]


def test_show_and_export_read_revision_and_chart(stored):
    cli, _ = stored
    first, second = _hashes(cli)
    r = cli("show", f"schwarzschild@{first[:8]}:isotropic", "--json")
    assert r.exit_code == 0, r.stderr
    info = json.loads(r.stdout)
    assert info["number"] == 1 and [c["name"] for c in info["charts"]] == ["isotropic"]
    assert json.loads(cli("show", "schwarzschild", "--json").stdout)["number"] == 2
    assert json.loads(cli("show", "schwarzschild@1", "--json").stdout)["revision"] == first
    r = cli("export", f"schwarzschild@{first[:8]}", "--allow-unverified")
    assert r.exit_code == 0, r.stderr
    assert json.loads(r.stdout)["revision"] == first


def test_errors_name_the_subject(stored):
    cli, _ = stored
    r = cli("show", "schwarzschild@ffff0000")
    assert r.exit_code == 2
    assert one_error_line(r) == "Error: schwarzschild@ffff0000: no revision of schwarzschild starts with ffff0000 " \
                                "(see 'gravicat history schwarzschild')"
    r = cli("export", "schwarzschild:nowhere", "--allow-unverified")
    assert r.exit_code == 2
    line = one_error_line(r)
    assert line.startswith("Error: schwarzschild:nowhere: no chart 'nowhere' (charts: schwarzschild, ")
    assert "isotropic" in line
    r = cli("show", "nobody")
    assert r.exit_code == 2 and "nobody: no entry 'nobody'" in one_error_line(r)
    r = cli("show", "schwarzschild:isotropic", "--chart", "schwarzschild")
    assert r.exit_code == 2 and "names chart 'isotropic' but --chart is 'schwarzschild'" in one_error_line(r)
    r = cli("verify", str(SCHWARZSCHILD))
    assert r.exit_code == 2 and "gravicat check" in one_error_line(r)


def test_ambiguous_revision_prefix(stored):
    cli, copy = stored
    hashes = _hashes(cli)
    n = 0
    def shared_letter():  # a digit-only prefix shorter than 6 reads as a revision number: use a-f
        return next((h[0] for h in hashes if h[0] in "abcdef" and sum(g[0] == h[0] for g in hashes) > 1), None)

    while shared_letter() is None and n < 60:
        n += 1
        copy.write_text(copy.read_text().replace('title = "', f'title = "{n} ', 1))
        assert cli("add", str(copy)).exit_code == 0
        hashes = _hashes(cli)
    digit = shared_letter()
    r = cli("show", f"schwarzschild@{digit}")
    line = one_error_line(r)
    assert r.exit_code == 2 and f"schwarzschild@{digit}: '{digit}' matches " in line and "give more characters" in line


@pytest.mark.parametrize("form", ["entry", "entry-rev", "file"])
def test_check_invariants_and_compare_take_every_form(stored, form):
    cli, copy = stored
    subject = {"entry": "schwarzschild:isotropic", "entry-rev": "schwarzschild@1:isotropic",
               "file": f"{copy}:isotropic"}[form]
    r = cli("invariants", subject, "--json")
    assert r.exit_code == 0, r.stderr
    out = json.loads(r.stdout)
    assert [c["chart"] for c in out["charts"]] == ["isotropic"]
    assert out["charts"][0]["ricci_scalar"] == "0"
    r = cli("check", subject, "--only", "signature", "--json")
    assert r.exit_code == 0, r.stderr
    assert {c["chart"] for c in json.loads(r.stdout)["charts"]} == {"isotropic"}
    r = cli("compare", subject, "schwarzschild:isotropic", "--json", "--no-search")
    assert r.exit_code == 0, r.stderr
    assert json.loads(r.stdout)["verdict"] == "identical"


def test_verify_takes_a_revision_and_a_chart(stored):
    cli, _ = stored
    r = cli("verify", "schwarzschild@1:isotropic", "--json")
    assert r.exit_code == 0, r.stderr
    out = json.loads(r.stdout)
    first = _hashes(cli)[0]
    assert [e["revision"] for e in out["entries"]] == [first]
    assert {c["chart"] for c in out["entries"][0]["checks"]} == {"isotropic"}


def test_orbits_and_export_set_option(stored, python_target):
    cli, copy = stored
    for subject in ("schwarzschild:schwarzschild", f"{copy}:schwarzschild"):
        r = cli("orbits", subject, "--set", "M=1", "--json")
        assert r.exit_code == 0, r.stderr
    r = cli("export", "schwarzschild:schwarzschild", "--to", "python", "--set", "M=1", "--allow-unverified")
    assert r.exit_code == 0, r.stderr
    old = cli("export", "schwarzschild:schwarzschild", "--to", "python", "--params", "M=1", "--allow-unverified")
    assert old.exit_code == 0 and "deprecated" in one_error_line(old)
    assert old.stdout.splitlines()[1:] == r.stdout.splitlines()[1:]
    both = cli("export", "schwarzschild", "--to", "python", "--set", "M=1", "--params", "M=2",
               "--allow-unverified")
    assert both.exit_code == 2 and "--set: M: is 1 but --params gives 2" in both.stderr


def test_history_diff_and_revert_take_entry_subjects(stored):
    cli, copy = stored
    first, second = _hashes(cli)
    r = cli("diff", "schwarzschild@1", "--json")  # as 'diff schwarzschild 1': revision 1 against the latest
    assert r.exit_code == 0, r.stderr
    out = json.loads(r.stdout)
    assert (out["from"]["number"], out["to"]["number"]) == (1, 2)
    r = cli("revert", f"schwarzschild@{first[:10]}")
    assert r.exit_code == 0, r.stderr
    assert "revision 1 restored as revision 3" in r.stdout
    for args, words in [(("history", "schwarzschild:isotropic"), "drop ':isotropic'"),
                        (("history", "schwarzschild@1"), "give the entry id alone"),
                        (("history", str(copy)), "a file has no history"),
                        (("revert", "schwarzschild@1", "2"), "give the revision to restore once"),
                        (("revert", "schwarzschild"), "give the revision to restore once")]:
        r = cli(*args)
        assert r.exit_code == 2 and words in one_error_line(r), (args, r.stderr)

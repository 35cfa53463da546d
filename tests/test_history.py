"""History, diff and revert: three revisions of one entry, their check results, and a revert.

The scenario (our own): the Halcyon Reach group stores its exterior metric, a colleague
introduces a typo (r**2 for r in g_tt), the next revision fixes it, and later the first
revision is restored. The metric is the Schwarzschild exterior, MTW (1973), eq. 31.1.
"""

from __future__ import annotations

import json

import pytest
import sympy as sp

from gravicat.api.history import field_diff, metric_changes, summarize

M, r = sp.symbols("M r")

BASE = '''
id = "halcyon-exterior"
title = "Halcyon Reach exterior"
summary = "Exterior of the Halcyon Reach test mass."
field-equations = "vacuum"
tags = {tags}

[[references]]
citation = "C. W. Misner, K. S. Thorne and J. A. Wheeler, Gravitation (1973), eq. 31.1"

[parameters.M]
description = "mass"
assume = ["positive"]
range = "M > 0"

[charts.exterior]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 2*M", "0 < theta < pi"]
define = {{ f = "{f}" }}
line-element = "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
'''


def one_error_line(result) -> str:
    lines = [line for line in result.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("Error: ") and "Traceback" not in result.output
    return lines[0]


@pytest.fixture
def three_revisions(empty_catalogue, tmp_path):
    """Revision 1 (correct, verified), 2 (typo, verified: fails), 3 (fixed, new tag, verified)."""
    cli = empty_catalogue
    path = tmp_path / "exterior.toml"
    steps = [
        ('["static"]', "1 - 2*M/r", "Ines Varga-Lund", "first version", 0),
        ('["static"]', "1 - 2*M/r**2", "Tomas Oyelaran-Berg", "tidy the lapse", 1),
        ('["spherical-symmetry", "static"]', "1 - 2*M/r", "Ines Varga-Lund", "fix r**2 typo; tag", 0),
    ]
    for tags, f, author, message, exit_code in steps:
        path.write_text(BASE.format(tags=tags, f=f))
        added = cli("add", str(path), "--author", author, "-m", message)
        assert added.exit_code == 0, added.output
        verified = cli("verify", "halcyon-exterior")
        assert verified.exit_code == exit_code, verified.output
    return cli


def test_history_lists_revisions_with_authors_changes_and_status(three_revisions):
    cli = three_revisions
    out = json.loads(cli("history", "halcyon-exterior", "--json").stdout)
    revs = out["revisions"]
    assert [r["number"] for r in revs] == [3, 2, 1]  # newest first
    assert [r["author"] for r in revs] == ["Ines Varga-Lund", "Tomas Oyelaran-Berg", "Ines Varga-Lund"]
    assert [r["message"] for r in revs] == ["fix r**2 typo; tag", "tidy the lapse", "first version"]
    assert [r["status"] for r in revs] == ["pass", "fail", "pass"]
    assert revs[2]["summary"] == "created" and revs[2]["parent"] is None
    assert revs[1]["summary"] == "chart exterior: define" and revs[1]["parent"] == revs[2]["hash"]
    assert "tags +spherical-symmetry" in revs[0]["summary"]
    assert revs[1]["checks"]["fail"] >= 1 and "fail" not in revs[2]["checks"]
    assert all(len(r["hash"]) == 64 and r["source"].endswith("exterior.toml") for r in revs)
    human = cli("history", "halcyon-exterior")
    assert human.exit_code == 0
    assert "Tomas Oyelaran-Berg" in human.stdout and "fail" in human.stdout


def test_diff_shows_fields_symbolic_metric_difference_and_changed_checks(three_revisions):
    cli = three_revisions
    out = json.loads(cli("diff", "halcyon-exterior", "1", "2", "--json").stdout)
    assert out["from"]["number"] == 1 and out["to"]["number"] == 2
    assert out["fields"] == [{"path": "charts.exterior.define.f", "change": "changed",
                              "old": "1 - 2 * M / r", "new": "1 - 2 * M / r ** 2"}]
    diffs = {m["component"]: sp.sympify(m["difference"], locals={"M": M, "r": r}) for m in out["metric"]}
    assert set(diffs) == {"g[t,t]", "g[r,r]"}  # the angular part did not change
    # new - old, computed by hand from g_tt = -f and g_rr = 1/f
    assert sp.simplify(diffs["g[t,t]"] - (-(1 - 2 * M / r**2) + (1 - 2 * M / r))) == 0
    assert sp.simplify(diffs["g[r,r]"] - (1 / (1 - 2 * M / r**2) - 1 / (1 - 2 * M / r))) == 0
    changed = {(c["chart"], c["check"]): (c["old"], c["new"]) for c in out["checks"]}
    assert changed[("exterior", "field-equations")] == ("pass", "fail")
    # no revision given: the latest against its predecessor; one given: that one against the latest
    latest = json.loads(cli("diff", "halcyon-exterior", "--json").stdout)
    assert (latest["from"]["number"], latest["to"]["number"]) == (2, 3)
    assert {(c["old"], c["new"]) for c in latest["checks"] if c["check"] == "field-equations"} == {("fail", "pass")}
    one = json.loads(cli("diff", "halcyon-exterior", "1", "--json").stdout)
    assert (one["from"]["number"], one["to"]["number"]) == (1, 3)
    assert one["metric"] == [] and [f["path"] for f in one["fields"]] == ["tags[spherical-symmetry]"]
    human = cli("diff", "halcyon-exterior", "1", "2")
    assert human.exit_code == 0
    assert "charts.exterior.define.f" in human.stdout and "field-equations: pass -> fail" in human.stdout


def test_revert_creates_a_new_revision_and_reuses_the_results_of_its_content(three_revisions):
    """Issue 13, item 10: after a revert, export refused ("no checks have been run on this revision")
    although the identical content was verified. Check results belong to the content hash."""
    cli = three_revisions
    before = {n: json.loads(cli("show", "halcyon-exterior", "--revision", str(n), "--json").stdout)
              for n in (1, 2, 3)}
    assert {c["check"]: c["status"] for c in before[2]["checks"]}["field-equations"] == "fail"
    assert {c["check"]: c["status"] for c in before[1]["checks"]}["field-equations"] == "pass"

    reverted = cli("revert", "halcyon-exterior", "1", "--author", "Ines Varga-Lund")
    assert reverted.exit_code == 0, reverted.output
    assert "revision 1 restored as revision 4" in reverted.stdout
    hist = json.loads(cli("history", "halcyon-exterior", "--json").stdout)["revisions"]
    assert [r["number"] for r in hist] == [4, 3, 2, 1]  # nothing deleted
    newest = hist[0]
    assert newest["hash"] == before[1]["revision"]  # the same content, so the same hash
    assert newest["message"] == "revert to 1" and newest["author"] == "Ines Varga-Lund"
    assert newest["status"] == "pass"  # the results of revision 1's content are revision 4's
    assert newest["same_content_as"] == 1 and newest["status_of_same_content"] == "pass"
    shown = json.loads(cli("show", "halcyon-exterior", "--json").stdout)
    assert shown["number"] == 4 and shown["checks"] == before[1]["checks"]
    # every old revision is still there, with its own results
    for n in (1, 2, 3):
        again = json.loads(cli("show", "halcyon-exterior", "--revision", str(n), "--json").stdout)
        assert again["checks"] == before[n]["checks"]
    # export is not refused, and carries the verified status; verify has nothing to compute
    exported = cli("export", "halcyon-exterior", "--to", "python")
    assert exported.exit_code == 0, exported.output
    assert "status:    pass" in exported.stdout[:2000]
    assert json.loads(exported_json(cli))["checks"] == before[1]["checks"]
    # list and find --status agree with show: the reverted revision is verified, not "unverified"
    listed = {e["id"]: e for e in json.loads(cli("list", "--json").stdout)}
    assert listed["halcyon-exterior"]["status"] == "pass", listed["halcyon-exterior"]
    assert "halcyon-exterior" in cli("list", "--status", "verified").stdout
    verified = json.loads(cli("verify", "halcyon-exterior", "--json").stdout)["entries"][0]
    assert verified["computed"] == 0 and verified["status"] == "pass"
    # recomputing stores new rows against revision 4; they are the results of that content
    assert cli("verify", "halcyon-exterior", "--force").exit_code == 0
    after = json.loads(cli("show", "halcyon-exterior", "--json").stdout)
    assert after["number"] == 4 and after["checks"] and after["checks"] != before[1]["checks"]
    assert json.loads(cli("show", "halcyon-exterior", "--revision", "1", "--json").stdout)["checks"] == after["checks"]
    for n in (2, 3):  # other content keeps its own results
        again = json.loads(cli("show", "halcyon-exterior", "--revision", str(n), "--json").stdout)
        assert again["checks"] == before[n]["checks"]
    # reverting to the latest revision, or to a revision with the latest content
    latest = cli("revert", "halcyon-exterior", "4")
    assert latest.exit_code == 2 and "already the latest revision" in one_error_line(latest)
    same = cli("revert", "halcyon-exterior", "1")
    assert same.exit_code == 0 and "nothing stored" in same.stdout
    assert len(json.loads(cli("history", "halcyon-exterior", "--json").stdout)["revisions"]) == 4


def exported_json(cli) -> str:
    out = cli("export", "halcyon-exterior", "--to", "json")
    assert out.exit_code == 0, out.output
    return out.stdout


def test_bad_ids_and_revisions_are_one_line_errors(empty_catalogue, tmp_path):
    cli = empty_catalogue
    for args in (("history", "no-such"), ("diff", "no-such"), ("revert", "no-such", "1")):
        result = cli(*args)
        assert result.exit_code == 2 and "no entry 'no-such'" in one_error_line(result)
    path = tmp_path / "e.toml"
    path.write_text(BASE.format(tags='["static"]', f="1 - 2*M/r"))
    assert cli("add", str(path)).exit_code == 0
    missing = cli("diff", "halcyon-exterior", "7", "1")
    assert missing.exit_code == 2 and "no revision '7'" in one_error_line(missing)
    only = cli("diff", "halcyon-exterior")
    assert only.exit_code == 0 and "is the first; nothing to compare" in only.stdout


def test_field_diff_and_summary_on_documents():
    old = {"title": "A", "tags": ["static"], "parameters": {"M": {"range": "M > 0"}},
           "charts": {"c": {"domain": ["r > 2 * M"], "define": {"f": "1"}}}, "limits": {}}
    new = {"title": "B", "tags": ["charged", "static"],
           "parameters": {"M": {"range": "M > 0"}, "Q": {"range": "Q > 0"}},
           "charts": {"c": {"domain": ["r > 3 * M"], "define": {"f": "1"}}, "d": {"domain": []}}, "limits": {}}
    changes = field_diff(old, new)
    assert [(c.path, c.kind) for c in changes] == [
        ("title", "changed"), ("tags[charged]", "added"), ("parameters.Q", "added"),
        ("charts.c.domain", "changed"), ("charts.d", "added")]
    assert summarize(changes) == "title changed; tags +charged; parameter Q added; chart c: domain; chart d added"
    assert summarize([]) == "no content change"


def test_a_rewritten_but_equal_metric_is_no_metric_change():
    from gravicat.format.metricfile import validate

    def doc(line_element):
        return validate({"id": "halcyon-x", "title": "x", "field-equations": "vacuum",
                         "parameters": {"M": {"assume": ["positive"]}},
                         "charts": {"c": {"coordinates": ["t", "r", "theta", "phi"],
                                          "line-element": line_element}}}, "test").data

    a = doc("-(1 - 2*M/r)*dt**2 + dr**2/(1 - 2*M/r) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)")
    b = doc("-(r - 2*M)/r*dt**2 + r*dr**2/(r - 2*M) + r**2*dtheta**2 + r**2*(1 - cos(theta)**2)*dphi**2")
    assert [c.path for c in field_diff(a, b)] == ["charts.c.line-element"]
    assert metric_changes(a, b) == []  # sin^2 = 1 - cos^2 is proved, not reported
    c = doc("-(1 - 2*M/r)*dt**2 + dr**2/(1 - 2*M/r) + r**2*dtheta**2 + r**2*dphi**2")
    (only,) = metric_changes(a, c)
    assert only.component == "g[phi,phi]"
    theta = sp.Symbol("theta")
    assert sp.simplify(sp.sympify(only.difference, locals={"r": r, "theta": theta}) - r**2 * sp.cos(theta) ** 2) == 0

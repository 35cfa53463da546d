"""check / verify / invariants through the command line, on hand-typed files of our own scenario."""

from __future__ import annotations

import json

import pytest
import sympy
from conftest import DATA

from gravicat.format.metricfile import load_file

GOOD = DATA / "corvin-exterior.toml"


def broken_copy(tmp_path, old: str, new: str, name: str = "typo.toml"):
    text = GOOD.read_text()
    assert old in text
    path = tmp_path / name
    path.write_text(text.replace(old, new))
    return path


def test_check_passes_a_correct_schwarzschild_exterior(cli):
    r = cli("check", str(GOOD), "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert out["metric"] == "corvin9-exterior" and out["status"] == "pass"
    checks = {c["check"]: c for c in out["charts"][0]["checks"]}
    fe = checks["field-equations"]
    assert fe["status"] == "pass" and fe["method"] == "symbolic" and fe["counterexample"] is None
    assert set(fe) >= {"check", "status", "method", "detail", "counterexample", "seconds"}
    assert checks["signature"]["status"] == "pass"


def test_flipped_sign_fails_with_a_real_counterexample(cli, tmp_path):
    # one flipped sign in g_rr (a typical copying slip): no longer vacuum
    bad = broken_copy(tmp_path, "dr**2/f", "dr**2/(1 + 2*M/r)")
    r = cli("check", str(bad), "--json", "--only", "field-equations")
    assert r.exit_code == 1
    out = json.loads(r.stdout)
    fe = out["charts"][0]["checks"][0]
    assert out["status"] == "fail" and fe["status"] == "fail"
    cex = fe["counterexample"]
    assert cex and cex["component"] and cex["residual"] not in ("0", 0)
    # the residual is real: recompute R_ab of the broken metric with sympy at the reported point
    # only M and r enter R_rr of this static, spherically symmetric metric; they are exact rationals
    point = {k: sympy.Rational(cex["point"][k]) for k in ("M", "r")}
    t, r_, th, ph, M = sympy.symbols("t r theta phi M")
    g = sympy.diag(-(1 - 2 * M / r_), 1 / (1 + 2 * M / r_), r_**2, r_**2 * sympy.sin(th) ** 2)
    coords = [t, r_, th, ph]
    ginv = g.inv()
    gamma = [[[sum(ginv[a, d] * (sympy.diff(g[d, b], coords[c]) + sympy.diff(g[d, c], coords[b])
                                 - sympy.diff(g[b, c], coords[d])) for d in range(4)) / 2
               for c in range(4)] for b in range(4)] for a in range(4)]
    rrr = sum(sympy.diff(gamma[a][1][1], coords[a]) - sympy.diff(gamma[a][1][a], coords[1])
              + sum(gamma[a][a][e] * gamma[e][1][1] - gamma[a][1][e] * gamma[e][a][1] for e in range(4))
              for a in range(4))
    assert sympy.simplify(rrr.subs({M: point["M"], r_: point["r"]})) != 0  # R_rr != 0 there


def test_wrong_published_invariant_fails(cli, tmp_path):
    bad = broken_copy(tmp_path, 'value = "48*M**2/r**6"', 'value = "24*M**2/r**6"')
    r = cli("check", str(bad), "--json", "--only", "invariants")
    assert r.exit_code == 1
    checks = json.loads(r.stdout)["charts"][0]["checks"]
    assert any(c["status"] == "fail" and c["counterexample"] for c in checks)


def test_unknown_check_and_chart_are_input_errors(cli):
    r = cli("check", str(GOOD), "--only", "horoscope")
    assert r.exit_code == 2 and "horoscope" in r.stderr and len(r.stderr.strip().splitlines()) == 1
    r = cli("check", str(GOOD), "--chart", "kruskal")
    assert r.exit_code == 2 and "charts.kruskal" in r.stderr


def test_verify_stores_then_reuses_then_forces(empty_catalogue):
    cli = empty_catalogue
    assert cli("add", str(GOOD)).exit_code == 0
    assert json.loads(cli("list", "--json").stdout)[0]["status"] == "unverified"
    first = cli("verify", "corvin9-exterior", "--json")
    assert first.exit_code == 0, first.output
    out = json.loads(first.stdout)["entries"][0]
    assert out["status"] == "pass" and out["computed"] == 1
    again = json.loads(cli("verify", "--all", "--json").stdout)["entries"][0]
    assert again["computed"] == 0 and again["status"] == "pass"
    forced = json.loads(cli("verify", "--all", "--force", "--json").stdout)["entries"][0]
    assert forced["computed"] == 1
    listed = json.loads(cli("list", "--json", "--status", "pass").stdout)
    assert [row["id"] for row in listed] == ["corvin9-exterior"]
    shown = json.loads(cli("show", "corvin9-exterior", "--json").stdout)
    assert {c["check"] for c in shown["checks"]} >= {"structure", "signature", "field-equations"}
    exported = json.loads(cli("export", "corvin9-exterior").stdout)
    assert exported["checks"] and all(c["status"] in ("pass", "skipped") for c in exported["checks"])


def test_verify_needs_ids_or_all(empty_catalogue):
    r = empty_catalogue("verify")
    assert r.exit_code == 2 and "--all" in r.stderr


def test_invariants_of_schwarzschild(cli):
    # Kretschmann 48 M^2 / r^6: Misner, Thorne & Wheeler, Gravitation (1973), eq. 31.4 (value recalled
    # from memory); Ricci scalar 0 (vacuum)
    r = cli("invariants", str(GOOD), "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    chart = out["charts"][0]
    M, rr = sympy.symbols("M r", positive=True)
    k = sympy.sympify(chart["kretschmann"], locals={"M": M, "r": rr})
    assert sympy.simplify(k - 48 * M**2 / rr**6) == 0
    assert sympy.sympify(chart["ricci_scalar"]) == 0


# --------------------------------------------------------------------------- reduces-to, resolved lazily

LIMITED = """
id = "halcyon-drift"
title = "Halcyon drift exterior"
field-equations = "vacuum"

[parameters.M]
assume = ["positive"]

[charts.static]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 2*M", "0 < theta < pi"]
define = { f = "1 - 2*M/r" }
line-element = "-f*dt**2 + dr**2/f + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"

[charts.plain]
coordinates = ["t", "x", "y", "z"]
line-element = "-dt**2 + dx**2 + dy**2 + dz**2"

[limits.same-as-schwarzschild]
chart = "static"
reduces-to = "TARGET"
"""


def test_bundled_documents_reads_only_the_named_file():
    from gravicat.engine.runner import bundled_documents
    from gravicat.store import revisions as store

    docs = bundled_documents()
    kerr = docs.get("kerr")
    assert kerr is not None and kerr.source == "bundled:kerr.toml" and "kerr-schild" in kerr.chart_names
    assert set(docs._bundled) == {"kerr"} and not docs._complete
    assert docs.get("no-such-entry") is None and "no-such-entry" not in docs
    assert docs._complete  # an id that is not a file name: every file was read, as before
    # the mapping is the one the store's reader gives (same ids, order, sources and content)
    old = {d.id: d for d in store.iter_bundled_documents()}
    assert list(docs) == list(old) and len(docs) == len(old)
    assert all(docs[k].data == old[k].data and docs[k].source == old[k].source for k in old)


def test_own_document_hides_the_bundled_one(tmp_path):
    from gravicat.engine.runner import bundled_documents

    path = tmp_path / "schwarzschild.toml"
    text = LIMITED.replace('id = "halcyon-drift"', 'id = "schwarzschild"')
    path.write_text(text.replace("TARGET", "minkowski:spherical"))
    own = load_file(path)
    docs = bundled_documents().with_document(own)
    assert docs["schwarzschild"] is own and docs.get("minkowski").source == "bundled:minkowski.toml"
    assert list(docs).count("schwarzschild") == 1


def _check_limit(cli, tmp_path, target, exit_code=0):
    path = tmp_path / "drift.toml"
    path.write_text(LIMITED.replace("TARGET", target))
    r = cli("check", str(path), "--json", "--only", "limits")
    assert r.exit_code == exit_code, r.output
    charts = json.loads(r.stdout)["charts"]
    return {c["check"]: c for c in charts[0]["checks"]}, path


def test_reduces_to_a_bundled_entry_is_proved(cli, tmp_path):
    # the exterior is the bundled Schwarzschild chart itself (same M, same coordinates): proved exactly
    checks, _ = _check_limit(cli, tmp_path, "schwarzschild:schwarzschild")
    lim = checks["limits:same-as-schwarzschild"]
    assert lim["status"] == "pass" and lim["method"] == "symbolic", lim
    assert lim["detail"].startswith("reduces to schwarzschild:schwarzschild")


def test_unknown_reduces_to_target_is_reported_as_before(cli, tmp_path):
    from gravicat.engine.runner import check_document, make_resolver
    from gravicat.registry import make_plugin_manager, verifiers
    from gravicat.store import revisions as store

    checks, path = _check_limit(cli, tmp_path, "no-such-entry:static", exit_code=1)
    lim = checks["limits:same-as-schwarzschild"]
    # limits version 3: a target found nowhere fails that limit (it was skipped before; issue 14 item 12)
    assert lim["status"] == "fail" and lim["detail"].startswith("target chart 'no-such-entry:static' not found")
    # the same result as resolving against every bundled document read through the store
    doc = load_file(path)
    chosen = [verifiers(make_plugin_manager())["limits"]]
    old = {d.id: d for d in store.iter_bundled_documents()}
    before = check_document(doc, chosen, resolve=make_resolver({**old, doc.id: doc}))
    assert [r.to_json()["checks"] for r in before][0][0]["detail"] == lim["detail"]


def test_check_of_a_file_does_not_import_the_sql_store(tmp_path):
    import os
    import subprocess
    import sys

    path = tmp_path / "drift.toml"
    path.write_text(LIMITED.replace("TARGET", "schwarzschild:schwarzschild"))
    code = (
        "import json, sys\n"
        "from typer.testing import CliRunner\n"
        "from gravicat.cli import app\n"
        f"r = CliRunner().invoke(app, ['check', {str(path)!r}, '--only', 'limits', '--json'])\n"
        "print(json.dumps({'code': r.exit_code, 'loaded': sorted(m for m in ('gravicat.store.revisions', 'sqlalchemy',"
        " 'gravicat.store.models') if m in sys.modules)}))\n"
    )
    env = {k: v for k, v in os.environ.items() if not k.startswith("GRAVICAT_")}
    env["GRAVICAT_CONFIG"] = str(tmp_path / "no-config.toml")
    # no catalogue yet: the user's catalogue is looked in first (issue 13, item 8), but a SQLite
    # file that does not exist is known to hold nothing without importing SQLAlchemy
    env["GRAVICAT_DB"] = f"sqlite:///{tmp_path / 'not-created.sqlite'}"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout.strip().splitlines()[-1]) == {"code": 0, "loaded": []}


# --------------------------------------------------------------------------- check and verify agree on targets
# Issue 13, item 8: `check FILE` reported a limit naming one of the user's own catalogue entries as
# "skipped, not found" while `verify` of the same content reported "fail". Both now look in the file
# itself, then the user's catalogue, then the bundled catalogue. The metrics are Schwarzschild's
# exterior (Misner, Thorne & Wheeler, Gravitation, 1973, eq. 31.1) and a copy with a slip in g_tt.

USERS_TARGET = """
id = "halcyon-reference"
title = "Halcyon reference exterior (the group's own entry)"
field-equations = "none"

[parameters.M]
assume = ["positive"]

[charts.static]
coordinates = ["t", "r", "theta", "phi"]
domain = ["r > 2*M", "0 < theta < pi"]
line-element = "-(GTT)*dt**2 + dr**2/(1 - 2*M/r) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
"""


def _limit_verdicts(cli, tmp_path, target: str, users_gtt: str | None, *, user_id: str = "halcyon-reference"):
    """(check's, verify's) status of the limit, with the user's entry ``user_id`` stored first."""
    assert cli("init", "--empty").exit_code == 0
    if users_gtt is not None:
        own = tmp_path / "users-entry.toml"
        own.write_text(USERS_TARGET.replace("GTT", users_gtt).replace('id = "halcyon-reference"', f'id = "{user_id}"')
                       .replace("[charts.static]", "[charts.static]" if user_id != "schwarzschild"
                                else "[charts.schwarzschild]"))
        assert cli("add", str(own)).exit_code == 0
    path = tmp_path / "drift.toml"
    path.write_text(LIMITED.replace("TARGET", target))
    checked = cli("check", str(path), "--json", "--only", "limits")
    by_check = {c["check"]: c for c in json.loads(checked.stdout)["charts"][0]["checks"]}
    assert cli("add", str(path)).exit_code == 0
    verified = cli("verify", "halcyon-drift", "--json")
    stored = {c["check"]: c for c in json.loads(verified.stdout)["entries"][0]["checks"] if c["chart"] == "static"}
    name = "limits:same-as-schwarzschild"
    return (by_check[name]["status"], checked.exit_code), (stored[name]["status"], verified.exit_code)


def test_limit_to_a_users_entry_with_a_slip_fails_in_check_and_verify(cli, tmp_path):
    checked, verified = _limit_verdicts(cli, tmp_path, "halcyon-reference:static", "1 - M/r")
    assert checked == verified == ("fail", 1)


def test_limit_to_a_users_matching_entry_passes_in_check_and_verify(cli, tmp_path):
    checked, verified = _limit_verdicts(cli, tmp_path, "halcyon-reference:static", "1 - 2*M/r")
    assert checked == verified == ("pass", 0)


def test_users_entry_hides_the_bundled_one_of_the_same_id(cli, tmp_path):
    # the user's own "schwarzschild" (with a slip) is found before the bundled Schwarzschild
    checked, verified = _limit_verdicts(cli, tmp_path, "schwarzschild:schwarzschild", "1 - M/r",
                                        user_id="schwarzschild")
    assert checked == verified == ("fail", 1)


def test_bundled_target_not_in_the_users_catalogue_is_resolved_by_verify_too(cli, tmp_path):
    # an empty catalogue: verify used to report "not found" where check proved the limit
    checked, verified = _limit_verdicts(cli, tmp_path, "schwarzschild:schwarzschild", None)
    assert checked == verified == ("pass", 0)


# --------------------------------------------------------------------------- the table's detail column
# Issue 13, item 17: the detail was cut at 70 characters whatever the terminal. Layout rule (common
# practice, no source): fill the terminal's width, print everything when the output is piped.


def _table_lines(stdout: str) -> list[str]:
    return [line for line in stdout.splitlines() if line.startswith("static ")]


def test_piped_check_prints_the_whole_detail(cli, tmp_path):
    path = tmp_path / "drift.toml"
    path.write_text(LIMITED.replace("TARGET", "no-such-entry:static"))
    r = cli("check", str(path), "--only", "limits")  # CliRunner's output is not a terminal
    assert r.exit_code == 1, r.output  # the unknown target fails the limit (limits version 3)
    line = next(x for x in _table_lines(r.stdout) if "limits:same-as-schwarzschild" in x)
    assert line.rstrip().endswith("the user's catalogue and the bundled catalogue)") and "…" not in line


@pytest.mark.parametrize("columns", [100, 160])
def test_check_on_a_terminal_fills_its_width(cli, tmp_path, monkeypatch, columns):
    import gravicat.cli.checks as checks_cli

    monkeypatch.setattr(checks_cli, "terminal_width", lambda: columns)
    path = tmp_path / "drift.toml"
    path.write_text(LIMITED.replace("TARGET", "no-such-entry:static"))
    r = cli("check", str(path), "--only", "limits")
    lines = _table_lines(r.stdout)
    assert lines and max(len(x) for x in lines) <= columns
    line = next(x for x in lines if "limits:same-as-schwarzschild" in x)
    assert line.rstrip().endswith("…") and len(line.rstrip()) > 80  # more than the old 70-character detail


def test_fit_last_column_keeps_a_minimum_and_leaves_piped_rows_alone():
    from gravicat.cli._output import fit_last_column

    rows = [["a", "x" * 200], ["bb", "short"]]
    assert fit_last_column(rows, ["k", "detail"], None) == rows
    fitted = fit_last_column(rows, ["k", "detail"], 50)
    # the first column is drawn 3 wide (the header "k" plus two), then two spaces: 45 are left
    assert len(fitted[0][1]) == 50 - 5 and fitted[0][1].endswith("…") and fitted[1][1] == "short"
    from tabulate import tabulate

    assert max(map(len, tabulate(fitted, headers=["k", "detail"], tablefmt="simple").splitlines())) == 50
    assert len(fit_last_column(rows, ["k", "detail"], 5)[0][1]) == 24  # never narrower than 24


def test_check_needing_an_unreadable_catalogue_is_a_one_line_error(cli, tmp_path):
    # issue 13, item 8: the user's catalogue is part of the answer, so a broken one is reported
    # (exit 2, one line) rather than silently giving a verdict `verify` would not give
    path = tmp_path / "drift.toml"
    path.write_text(LIMITED.replace("TARGET", "schwarzschild:schwarzschild"))
    folder = tmp_path / "a-folder"
    folder.mkdir()
    r = cli("check", str(path), "--only", "limits", db=f"sqlite:///{folder}")
    lines = [x for x in r.stderr.splitlines() if x.strip()]
    assert r.exit_code == 2 and len(lines) == 1 and lines[0].startswith("Error: "), r.output
    # a file whose limits name no other entry never opens the catalogue
    r = cli("check", str(GOOD), "--only", "structure", db=f"sqlite:///{folder}")
    assert r.exit_code == 0, r.output

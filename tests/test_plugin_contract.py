"""The typed plugin contract: verifiers see a PreparedChart, exporters an ExportContext."""

from __future__ import annotations

import dataclasses
import subprocess
import sys
import typing

import pytest

import gravicat
from gravicat import CatalogError, CheckResult, ExportContext, Method, PreparedChart, Status
from gravicat.format.metricfile import build_chart
from gravicat.store import revisions as store

DOCS = {d.id: d for d in store.iter_bundled_documents()}


def protocol_members(proto) -> set[str]:
    names = set(typing.get_type_hints(proto)) | {k for k, v in vars(proto).items() if callable(v)}
    return {n for n in names if not n.startswith("_")}


@pytest.fixture(scope="module")
def kerr():
    from gravicat.engine.geometry import Geometry

    return Geometry(build_chart(DOCS["kerr"], "boyer-lindquist"))


def test_a_prepared_kerr_chart_is_a_prepared_chart(kerr):
    assert isinstance(kerr, PreparedChart)
    for name in protocol_members(PreparedChart):
        assert hasattr(kerr, name), name
    assert kerr.n == 4 and kerr.path in ("flint", "sympy") and kerr.sampler is kerr._sampler


def test_gravicat_exports_both_names_without_sympy():
    assert {"PreparedChart", "ExportContext"} <= set(gravicat.__all__)
    code = "import sys, gravicat; gravicat.PreparedChart; gravicat.ExportContext; print('sympy' in sys.modules)"
    assert subprocess.run([sys.executable, "-c", code], capture_output=True, text=True).stdout.strip() == "False"


class ThirdPartyVerifier:
    """Written against the Protocol only: the Kretschmann scalar of a chart is nonzero."""

    name, version = "third-party-kretschmann", "1"

    def check(self, subject: PreparedChart) -> list[CheckResult]:
        nonzero = not subject.is_zero(subject.kretschmann)
        return [CheckResult(check="kretschmann-nonzero", status=Status.PASS if nonzero else Status.FAIL,
                            method=Method.SYMBOLIC, detail=str(subject.to_sympy(subject.kretschmann)))]


class ThirdPartyExporter:
    name, version, suffix = "third-party-txt", "1", ".txt"

    def export(self, document, context: ExportContext) -> str:
        return f"{document.id} {context.revision} {context.chart or document.chart_names[0]} {len(context.checks)}\n"


def test_fake_verifier_and_exporter_work_end_to_end(kerr):
    from gravicat.checks import Exporter, Verifier

    verifier, exporter = ThirdPartyVerifier(), ThirdPartyExporter()
    assert isinstance(verifier, Verifier) and isinstance(exporter, Exporter)
    (result,) = verifier.check(kerr)
    # Kretschmann scalar of Kerr: 48 M^2 (r^6 - 15 r^4 a^2 c^2 + 15 r^2 a^4 c^4 - a^6 c^6) / Sigma^6, c = cos(theta)
    # (C. Cherubini, D. Bini, S. Capozziello, R. Ruffini, Second order scalar invariants of the Riemann tensor,
    # Int. J. Mod. Phys. D 11 (2002) 827, eq. 33; recalled from memory): nonzero for M != 0.
    assert result.status == Status.PASS and "M" in result.detail
    context = ExportContext(revision="abc123", chart="boyer-lindquist", checks=({"check": "x", "status": "pass"},))
    assert exporter.export(DOCS["kerr"], context) == "kerr abc123 boyer-lindquist 1\n"


def test_export_context_is_frozen_and_coerces_the_old_dict():
    ctx = ExportContext(revision="r1", params="M=1")
    with pytest.raises(dataclasses.FrozenInstanceError):
        ctx.revision = "r2"  # type: ignore[misc]
    assert ctx.replace(chart="c").chart == "c" and ctx.chart is None
    old = ExportContext.coerce({"revision": "r1", "checks": [], "params": "M=1"})
    assert old == ctx and old["revision"] == "r1" and old.get("chart", "first") == "first"
    with pytest.raises(CatalogError, match="unknown field"):
        ExportContext.coerce({"revision": "r1", "parms": "M=1"})
    with pytest.raises(CatalogError, match="revision"):
        ExportContext.coerce({"chart": "x"})


def test_built_in_plugins_are_annotated_with_the_contract():
    """Every built-in plugin module (each entry point of the gravicat group that lives in
    gravicat.plugins) follows the hook contract in its annotations."""
    import importlib
    from importlib.metadata import entry_points

    from gravicat.plugins import structure

    modules = sorted({ep.value for ep in entry_points(group="gravicat") if ep.value.startswith("gravicat.plugins.")})
    assert {"gravicat.plugins.petrov", "gravicat.plugins.killing", "gravicat.plugins.energy_conditions",
            "gravicat.plugins.constraints", "gravicat.plugins.geodesic_export",
            "gravicat.plugins.initial_data_export"} <= set(modules)
    seen_verifiers = seen_exporters = 0
    for name in modules:
        module = importlib.import_module(name)
        for verifier in getattr(module, "register_verifiers", lambda: [])():
            hints = typing.get_type_hints(verifier.check, globalns={**vars(module), "PreparedChart": PreparedChart,
                                                                    "CheckResult": CheckResult})
            assert hints["geometry"] is PreparedChart, verifier.name
            seen_verifiers += 1
        for exporter in getattr(module, "register_exporters", lambda: [])():
            assert exporter.export.__annotations__["context"] == "ExportContext", exporter.name
            seen_exporters += 1
    assert seen_verifiers >= 11 and seen_exporters >= 8
    assert [v.name for v in structure.register_verifiers() if getattr(v, "screens_repairs", False)] == ["structure"]

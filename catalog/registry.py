"""The plugin manager: built-ins and third-party plugins load the same way."""

from __future__ import annotations

from collections.abc import Iterable

import pluggy

from gravicat import hookspecs
from gravicat.errors import PluginError


def make_plugin_manager(*, autoload: bool = True, extra: Iterable[object] = (),
                        blocked: Iterable[str] = ()) -> pluggy.PluginManager:
    """A plugin manager with the gravicat hooks.

    ``autoload`` loads every plugin registered in the ``gravicat`` entry-point
    group (the built-ins are listed there too); ``extra`` registers more plugin
    objects (tests inject fakes here); ``blocked`` names are never loaded.
    """
    pm = pluggy.PluginManager(hookspecs.PROJECT)
    pm.add_hookspecs(hookspecs)
    blocked = list(blocked)
    if blocked and autoload:  # a misspelt name would block nothing, silently (issue 14 item 12)
        known = _entry_point_names()
        unknown = [name for name in blocked if name not in known]
        if unknown:
            raise PluginError(f"--disable-plugin: no plugin named {', '.join(repr(n) for n in unknown)} "
                              f"(known: {', '.join(sorted(known))})")
    for name in blocked:
        pm.set_blocked(name)
    if autoload:
        try:
            pm.load_setuptools_entrypoints(hookspecs.PROJECT)
        except Exception as exc:  # a broken third-party plugin must not look like our bug
            raise PluginError(f"a gravicat plugin failed to load: {type(exc).__name__}: {exc}") from None
    for plugin in extra:
        pm.register(plugin)
    try:
        pm.check_pending()
    except pluggy.PluginValidationError as exc:
        raise PluginError(f"plugin {exc.plugin!r} implements an unknown hook: {exc}") from None
    return pm


def _entry_point_names() -> set[str]:
    """Names of the plugins in the ``gravicat`` entry-point group (what ``--disable-plugin`` takes)."""
    from importlib.metadata import entry_points

    return {ep.name for ep in entry_points(group=hookspecs.PROJECT)}


def _collect(pm: pluggy.PluginManager, hook_name: str, kind: str) -> dict[str, object]:
    found: dict[str, object] = {}
    hook = getattr(pm.hook, hook_name)
    for impl in hook.get_hookimpls():
        try:
            items = impl.function()
        except Exception as exc:
            raise PluginError(f"plugin '{impl.plugin_name}' failed in {hook_name}: {exc}") from None
        for item in items or ():
            name = getattr(item, "name", None)
            if not isinstance(name, str) or not isinstance(getattr(item, "version", None), str):
                raise PluginError(f"plugin '{impl.plugin_name}' returned a {kind} without name/version")
            if name in found:
                raise PluginError(f"two plugins register the {kind} '{name}'; disable one with --disable-plugin")
            found[name] = item
    return found


def verifiers(pm: pluggy.PluginManager) -> dict[str, object]:
    """Registered verifiers by name, in registration order."""
    return _collect(pm, "register_verifiers", "verifier")


def exporters(pm: pluggy.PluginManager) -> dict[str, object]:
    """Registered exporters by target name."""
    return _collect(pm, "register_exporters", "exporter")


def plugin_names(pm: pluggy.PluginManager) -> list[tuple[str, str]]:
    """(plugin name, distribution or module) for every registered plugin."""
    out = []
    dists = {id(plugin): dist for plugin, dist in pm.list_plugin_distinfo()}
    for name, plugin in pm.list_name_plugin():
        if plugin is None:
            continue
        dist = dists.get(id(plugin))
        out.append((name, f"{dist.project_name} {dist.version}" if dist else getattr(plugin, "__name__", "?")))
    return sorted(out)

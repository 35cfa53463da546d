"""Settings, with one precedence: option > GRAVICAT_* environment variable >
``config.toml`` in the user config directory > default. Every setting is
documented in README.md (a test checks this)."""

from __future__ import annotations

import getpass
import os
from dataclasses import dataclass, field
from pathlib import Path

from gravicat.errors import InputError

# setting name -> (environment variable, config.toml key)
SETTINGS = {
    "database": ("GRAVICAT_DB", "database"),
    "disable_plugins": ("GRAVICAT_DISABLE_PLUGINS", "disable-plugins"),
    "author": ("GRAVICAT_AUTHOR", "author"),
    "cluster": ("GRAVICAT_CLUSTER", "cluster"),
    "memory_cap": ("GRAVICAT_MEMORY_CAP", "memory-cap"),
}

_UNITS = {"": 1, "b": 1, "kib": 1024, "mib": 1024**2, "gib": 1024**3, "tib": 1024**4,
          "kb": 1000, "mb": 1000**2, "gb": 1000**3, "tb": 1000**4}


@dataclass(frozen=True)
class Settings:
    database: str
    disable_plugins: tuple[str, ...] = field(default=())
    author: str = ""
    cluster: str = ""  # a Dask scheduler address or local:N for 'verify'; "" = local forked children
    # bytes of address space each child process may add to what it inherits; 0 = no cap,
    # None = the runner's default (gravicat.engine.fork.DEFAULT_MEMORY_CAP_BYTES, 3 GiB)
    memory_cap: int | None = None


def parse_memory_cap(value, where: str) -> int:
    """A ``memory-cap`` value in bytes: ``"3GiB"``, ``"512MiB"``, ``"2GB"``, a whole number of bytes,
    or ``"none"`` (0: no cap). Anything else is an :class:`InputError` naming ``where`` and the setting."""
    import re

    problem = "must be a size such as 3GiB or 512MiB (units KiB, MiB, GiB, TiB, kB, MB, GB, TB), or none"
    if isinstance(value, bool) or not isinstance(value, (str, int)):
        raise InputError(where, "memory-cap", problem)
    text = str(value).strip()
    if text.lower() in ("none", "unlimited", "0"):
        return 0
    match = re.fullmatch(r"(\d+(?:\.\d+)?)\s*([A-Za-z]*)", text)
    if not match or match.group(2).lower() not in _UNITS:
        raise InputError(where, "memory-cap", f"'{text[:40]}' {problem}")
    size = int(float(match.group(1)) * _UNITS[match.group(2).lower()])
    if size < 16 * 1024**2:
        raise InputError(where, "memory-cap", f"'{text[:40]}' is below the smallest cap, 16MiB (or give none)")
    return size


def config_path() -> Path:
    env = os.environ.get("GRAVICAT_CONFIG")
    if env:
        return Path(env)
    import platformdirs

    return Path(platformdirs.user_config_dir("gravicat", appauthor=False)) / "config.toml"


def _file_values() -> dict:
    path = config_path()
    if not path.is_file():
        return {}
    import tomllib

    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError, OSError) as exc:
        raise InputError(str(path), None, f"unreadable configuration: {exc}") from None
    known = {key for _, key in SETTINGS.values()}
    for key in data:
        if key not in known:
            raise InputError(str(path), key, f"unknown setting (known: {', '.join(sorted(known))})")
    return data


def _login_name() -> str:
    try:
        return getpass.getuser()
    except Exception:  # no login name in some containers
        return "unknown"


def load_settings(*, database: str | None = None, disable_plugins: list[str] | None = None,
                  author: str | None = None, cluster: str | None = None,
                  memory_cap: str | int | None = None) -> Settings:
    """Resolve every setting; arguments are the command-line options (None = not given)."""
    file = _file_values()

    def pick(name: str, given):
        env, key = SETTINGS[name]
        if given not in (None, [], ()):
            return given
        if os.environ.get(env):
            return os.environ[env]
        return file.get(key)

    db = pick("database", database)
    if db is not None and not isinstance(db, str):
        raise InputError(str(config_path()), "database", "must be a string URL")
    if not db:
        from gravicat.store.db import default_url

        db = default_url()
    blocked = pick("disable_plugins", disable_plugins) or ()
    if isinstance(blocked, str):
        blocked = [b.strip() for b in blocked.split(",") if b.strip()]
    who = pick("author", author) or _login_name()
    where = pick("cluster", cluster) or ""
    if not isinstance(where, str):
        raise InputError(str(config_path()), "cluster", "must be a string (tcp://host:8786 or local:N)")
    cap = pick("memory_cap", memory_cap)
    if cap is not None:
        env, _key = SETTINGS["memory_cap"]
        source = "argument" if memory_cap is not None else env if os.environ.get(env) else str(config_path())
        cap = parse_memory_cap(cap, source)
    return Settings(database=db, disable_plugins=tuple(blocked), author=str(who), cluster=where, memory_cap=cap)

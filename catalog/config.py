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
}


@dataclass(frozen=True)
class Settings:
    database: str
    disable_plugins: tuple[str, ...] = field(default=())
    author: str = ""
    cluster: str = ""  # a Dask scheduler address or local:N for 'verify'; "" = local forked children


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
                  author: str | None = None, cluster: str | None = None) -> Settings:
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
    return Settings(database=db, disable_plugins=tuple(blocked), author=str(who), cluster=where)

"""Alembic environment.

The application passes its own connection in ``config.attributes["connection"]``
(see :func:`gravicat.store.db.upgrade`); developers running the ``alembic`` command
use the URL in alembic.ini or ``-x url=...``.
"""

from alembic import context
from sqlalchemy import create_engine

from gravicat.store.models import Base

config = context.config
target_metadata = Base.metadata


def _configure(**kwargs):
    context.configure(target_metadata=target_metadata, render_as_batch=True, compare_type=True, **kwargs)


def run_offline() -> None:
    _configure(url=context.get_x_argument(as_dictionary=True).get("url") or config.get_main_option("sqlalchemy.url"),
               literal_binds=True)
    with context.begin_transaction():
        context.run_migrations()


def run_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _configure(connection=connection)
        with context.begin_transaction():
            context.run_migrations()
        return
    url = context.get_x_argument(as_dictionary=True).get("url") or config.get_main_option("sqlalchemy.url")
    engine = create_engine(url)
    with engine.begin() as conn:
        _configure(connection=conn)
        with context.begin_transaction():
            context.run_migrations()


if context.is_offline_mode():
    run_offline()
else:
    run_online()

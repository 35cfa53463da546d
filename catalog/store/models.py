"""Database tables (SQLAlchemy 2.x typed ORM). This module only declares tables.

An entry's content lives in immutable revisions: every change is a new row in
``revision`` holding the canonical document and its content hash; old rows are
never updated. Charts, parameters, tags and references are the searchable
projection of a revision. ``parent_id`` is unique per entry, so two writers
changing the same head produce one revision and one conflict, never a lost
update.
"""

from __future__ import annotations

import datetime as dt
from typing import Annotated, Any

from sqlalchemy import (
    JSON,
    DateTime,
    Enum,
    ForeignKey,
    Index,
    MetaData,
    String,
    Text,
    TypeDecorator,
    UniqueConstraint,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

from gravicat.checks import Method, Status

NAMING = {
    "ix": "ix_%(table_name)s_%(column_0_N_name)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


class UTCDateTime(TypeDecorator):
    """A timezone-aware UTC datetime; re-attaches the zone SQLite drops."""

    impl = DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value, dialect):
        if value is not None:
            if value.tzinfo is None:
                raise ValueError("naive datetime given to a UTC column")
            value = value.astimezone(dt.UTC)
        return value

    def process_result_value(self, value, dialect):
        if value is not None and value.tzinfo is None:
            value = value.replace(tzinfo=dt.UTC)
        return value


def utcnow() -> dt.datetime:
    return dt.datetime.now(dt.UTC)


pk = Annotated[int, mapped_column(primary_key=True)]
revision_fk = Annotated[int, mapped_column(ForeignKey("revision.id", ondelete="CASCADE"), index=True)]
name80 = Annotated[str, mapped_column(String(80))]
timestamp = Annotated[dt.datetime, mapped_column(UTCDateTime(), default=utcnow)]


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=NAMING)
    type_annotation_map = {dict[str, Any]: JSON, list[Any]: JSON, dt.datetime: UTCDateTime()}


class Entry(Base):
    """A catalogued spacetime; its content lives in immutable revisions."""

    __tablename__ = "entry"
    id: Mapped[pk]
    slug: Mapped[str] = mapped_column(String(80), unique=True)
    created_at: Mapped[timestamp]
    revisions: Mapped[list[Revision]] = relationship(
        back_populates="entry", cascade="all, delete-orphan", passive_deletes=True,
        order_by="Revision.number", foreign_keys="Revision.entry_id")


class Revision(Base):
    """One immutable version of an entry: the canonical document and its hash."""

    __tablename__ = "revision"
    __table_args__ = (UniqueConstraint("entry_id", "number"), UniqueConstraint("entry_id", "parent_id"))
    id: Mapped[pk]
    entry_id: Mapped[int] = mapped_column(ForeignKey("entry.id", ondelete="CASCADE"), index=True)
    parent_id: Mapped[int | None] = mapped_column(ForeignKey("revision.id", ondelete="CASCADE"))
    number: Mapped[int]
    hash: Mapped[str] = mapped_column(String(64), index=True)
    title: Mapped[str] = mapped_column(String(200))
    summary: Mapped[str] = mapped_column(Text, default="")
    field_equations: Mapped[str] = mapped_column(String(32), index=True)
    document: Mapped[dict[str, Any]]
    message: Mapped[str] = mapped_column(Text, default="")
    created_at: Mapped[timestamp]

    entry: Mapped[Entry] = relationship(back_populates="revisions", foreign_keys=[entry_id])
    provenance: Mapped[Provenance | None] = relationship(cascade="all, delete-orphan", passive_deletes=True)
    charts: Mapped[list[Chart]] = relationship(cascade="all, delete-orphan", passive_deletes=True,
                                               order_by="Chart.position")
    parameters: Mapped[list[Parameter]] = relationship(cascade="all, delete-orphan", passive_deletes=True,
                                                       order_by="Parameter.position")
    tags: Mapped[list[Tag]] = relationship(cascade="all, delete-orphan", passive_deletes=True)
    references: Mapped[list[Reference]] = relationship(cascade="all, delete-orphan", passive_deletes=True,
                                                       order_by="Reference.position")
    results: Mapped[list[CheckRecord]] = relationship(cascade="all, delete-orphan", passive_deletes=True,
                                                      order_by="CheckRecord.id")


class Provenance(Base):
    """Who stored a revision, when, from which file, with which gravicat."""

    __tablename__ = "provenance"
    id: Mapped[pk]
    revision_id: Mapped[int] = mapped_column(ForeignKey("revision.id", ondelete="CASCADE"), unique=True)
    author: Mapped[str] = mapped_column(String(200))
    source: Mapped[str] = mapped_column(Text)
    tool_version: Mapped[str] = mapped_column(String(40))
    created_at: Mapped[timestamp]


class Chart(Base):
    __tablename__ = "chart"
    __table_args__ = (UniqueConstraint("revision_id", "name"),)
    id: Mapped[pk]
    revision_id: Mapped[revision_fk]
    position: Mapped[int]
    name: Mapped[name80]
    coordinates: Mapped[list[Any]]
    domain: Mapped[list[Any]]
    line_element: Mapped[str | None] = mapped_column(Text)


class Parameter(Base):
    __tablename__ = "parameter"
    __table_args__ = (UniqueConstraint("revision_id", "name"),)
    id: Mapped[pk]
    revision_id: Mapped[revision_fk]
    position: Mapped[int]
    name: Mapped[str] = mapped_column(String(40), index=True)
    description: Mapped[str] = mapped_column(Text, default="")
    assume: Mapped[list[Any]]
    range: Mapped[str | None] = mapped_column(Text)
    default: Mapped[str | None] = mapped_column(Text)


class Tag(Base):
    __tablename__ = "tag"
    __table_args__ = (UniqueConstraint("revision_id", "name"),)
    id: Mapped[pk]
    revision_id: Mapped[revision_fk]
    name: Mapped[str] = mapped_column(String(80), index=True)


class Reference(Base):
    __tablename__ = "reference"
    id: Mapped[pk]
    revision_id: Mapped[revision_fk]
    position: Mapped[int]
    citation: Mapped[str] = mapped_column(Text)
    doi: Mapped[str | None] = mapped_column(String(200))


class CheckRecord(Base):
    """One stored verification result, attached to a revision and chart."""

    __tablename__ = "check_result"
    __table_args__ = (Index(None, "revision_id", "chart", "verifier", "verifier_version"),)
    id: Mapped[pk]
    revision_id: Mapped[int] = mapped_column(ForeignKey("revision.id", ondelete="CASCADE"))
    chart: Mapped[name80]
    check: Mapped[str] = mapped_column("check_name", String(80))
    verifier: Mapped[name80]
    verifier_version: Mapped[str] = mapped_column(String(40))
    status: Mapped[Status] = mapped_column(Enum(Status, native_enum=False, length=16,
                                                values_callable=lambda e: [m.value for m in e]))
    method: Mapped[Method] = mapped_column(Enum(Method, native_enum=False, length=16,
                                                values_callable=lambda e: [m.value for m in e]))
    detail: Mapped[str] = mapped_column(Text, default="")
    counterexample: Mapped[dict[str, Any] | None]
    seconds: Mapped[float]
    created_at: Mapped[timestamp]

"""The record's schema (SQLAlchemy 2 declarative).  Alembic migrations in
``migrations/versions`` create exactly this; a test compares the two.

Facts are keyed as in OPERATIONS.md (a row with the same key is the same fact); every
fact row points at the import (file, who, when) that recorded it, and values replaced
with ``--replace`` are kept in ``replaced_values``.
"""

from __future__ import annotations

import datetime as dt

from sqlalchemy import (Boolean, Date, DateTime, Double, ForeignKey, Integer, LargeBinary,
                        String, Text, UniqueConstraint)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column

NAME = String(200)


class Base(DeclarativeBase):
    pass


class Import(Base):
    """One recorded file (or set of files recorded together)."""

    __tablename__ = "imports"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    file_name: Mapped[str] = mapped_column(String(500))
    file_sha256: Mapped[str] = mapped_column(String(64))
    recorded_at: Mapped[dt.datetime] = mapped_column(DateTime)
    recorded_by: Mapped[str] = mapped_column(NAME)
    added: Mapped[int] = mapped_column(Integer)
    replaced: Mapped[int] = mapped_column(Integer)


class StockSurvey(Base):
    __tablename__ = "stock_surveys"
    __table_args__ = (UniqueConstraint("date", "store", name="uq_stock_surveys_key"),)
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    date: Mapped[dt.date] = mapped_column(Date)
    store: Mapped[str] = mapped_column(String(40))
    level_t: Mapped[float] = mapped_column(Double)
    method: Mapped[str | None] = mapped_column(String(20), nullable=True)
    note: Mapped[str | None] = mapped_column(Text, nullable=True)
    import_id: Mapped[int] = mapped_column(ForeignKey("imports.id"))


class Arrival(Base):
    __tablename__ = "arrivals"
    __table_args__ = (UniqueConstraint("supplier", "ticket", name="uq_arrivals_key"),)
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    date: Mapped[dt.date] = mapped_column(Date)
    supplier: Mapped[str] = mapped_column(NAME)
    mode: Mapped[str | None] = mapped_column(String(20), nullable=True)
    loads: Mapped[int] = mapped_column(Integer)
    tonnes: Mapped[float] = mapped_column(Double)
    ticket: Mapped[str] = mapped_column(NAME)
    caco3_pct: Mapped[float | None] = mapped_column(Double, nullable=True)
    import_id: Mapped[int] = mapped_column(ForeignKey("imports.id"))


class Shipment(Base):
    __tablename__ = "shipments"
    __table_args__ = (UniqueConstraint("party", "ticket", name="uq_shipments_key"),)
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    date: Mapped[dt.date] = mapped_column(Date)
    party: Mapped[str] = mapped_column(NAME)
    material: Mapped[str] = mapped_column(String(40))
    mode: Mapped[str | None] = mapped_column(String(20), nullable=True)
    loads: Mapped[int | None] = mapped_column(Integer, nullable=True)
    tonnes: Mapped[float] = mapped_column(Double)
    ticket: Mapped[str] = mapped_column(NAME)
    import_id: Mapped[int] = mapped_column(ForeignKey("imports.id"))


class Order(Base):
    __tablename__ = "orders"
    __table_args__ = (UniqueConstraint("order_id", name="uq_orders_key"),)
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    order_id: Mapped[str] = mapped_column(NAME)
    date: Mapped[dt.date] = mapped_column(Date)
    supplier: Mapped[str] = mapped_column(NAME)
    mode: Mapped[str | None] = mapped_column(String(20), nullable=True)
    loads: Mapped[int] = mapped_column(Integer)
    tonnes: Mapped[float | None] = mapped_column(Double, nullable=True)
    status: Mapped[str] = mapped_column(String(20))
    import_id: Mapped[int] = mapped_column(ForeignKey("imports.id"))


class GenerationRecord(Base):
    __tablename__ = "generation_history"
    __table_args__ = (UniqueConstraint("date", "unit", name="uq_generation_history_key"),)
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    date: Mapped[dt.date] = mapped_column(Date)
    unit: Mapped[str] = mapped_column(NAME)
    mwh: Mapped[float] = mapped_column(Double)
    import_id: Mapped[int] = mapped_column(ForeignKey("imports.id"))


class LabResult(Base):
    __tablename__ = "coal_quality_history"
    __table_args__ = (UniqueConstraint("date", "source", name="uq_coal_quality_history_key"),)
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    date: Mapped[dt.date] = mapped_column(Date)
    source: Mapped[str] = mapped_column(NAME)
    sulfur_pct: Mapped[float] = mapped_column(Double)
    ash_pct: Mapped[float | None] = mapped_column(Double, nullable=True)
    hhv_mj_per_kg: Mapped[float | None] = mapped_column(Double, nullable=True)
    import_id: Mapped[int] = mapped_column(ForeignKey("imports.id"))


class ReplacedValue(Base):
    """The audit trail: a recorded value that a later import replaced (``--replace``)."""

    __tablename__ = "replaced_values"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    import_id: Mapped[int] = mapped_column(ForeignKey("imports.id"))   # the replacing import
    old_import_id: Mapped[int] = mapped_column(ForeignKey("imports.id"))
    sheet: Mapped[str] = mapped_column(String(40))
    key: Mapped[str] = mapped_column(Text)
    column: Mapped[str] = mapped_column(String(40))
    old_value: Mapped[str | None] = mapped_column(Text, nullable=True)
    new_value: Mapped[str | None] = mapped_column(Text, nullable=True)


# --------------------------------------------------------------------------- plans (rev 0002)


class StoredWorkbook(Base):
    """A scenario workbook a plan was made from, by content (deduplicated)."""

    __tablename__ = "workbooks"
    sha256: Mapped[str] = mapped_column(String(64), primary_key=True)
    file_name: Mapped[str] = mapped_column(String(500))
    content: Mapped[bytes] = mapped_column(LargeBinary)


class PlanVersion(Base):
    __tablename__ = "plan_versions"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    created_at: Mapped[dt.datetime] = mapped_column(DateTime)
    created_by: Mapped[str] = mapped_column(NAME)
    as_of: Mapped[dt.date | None] = mapped_column(Date, nullable=True)
    start_date: Mapped[dt.date] = mapped_column(Date)
    horizon_days: Mapped[int] = mapped_column(Integer)
    workbook_sha256: Mapped[str] = mapped_column(ForeignKey("workbooks.sha256"))
    fingerprint: Mapped[str] = mapped_column(String(64))
    last_import_id: Mapped[int | None] = mapped_column(Integer, nullable=True)
    status: Mapped[str] = mapped_column(String(200))
    total_cost: Mapped[float] = mapped_column(Double)
    summary_json: Mapped[str] = mapped_column(Text)


class PlanMovement(Base):
    __tablename__ = "plan_movements"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    plan_id: Mapped[int] = mapped_column(ForeignKey("plan_versions.id", ondelete="CASCADE"), index=True)
    date: Mapped[dt.date] = mapped_column(Date)
    material: Mapped[str] = mapped_column(String(40))
    direction: Mapped[str] = mapped_column(String(3))
    party: Mapped[str] = mapped_column(NAME)
    lane: Mapped[str] = mapped_column(NAME)
    kind: Mapped[str] = mapped_column(String(20))
    loads: Mapped[int | None] = mapped_column(Integer, nullable=True)
    tonnes: Mapped[float] = mapped_column(Double)
    cost: Mapped[float] = mapped_column(Double)
    order_by: Mapped[dt.date | None] = mapped_column(Date, nullable=True)
    firm: Mapped[bool] = mapped_column(Boolean)
    booked: Mapped[bool] = mapped_column(Boolean)


class PlanInventory(Base):
    __tablename__ = "plan_inventory"
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    plan_id: Mapped[int] = mapped_column(ForeignKey("plan_versions.id", ondelete="CASCADE"), index=True)
    date: Mapped[dt.date] = mapped_column(Date)
    store: Mapped[str] = mapped_column(String(40))
    level_t: Mapped[float] = mapped_column(Double)
    safety_t: Mapped[float] = mapped_column(Double)
    capacity_t: Mapped[float] = mapped_column(Double)


FACT_TABLES = {
    "stock_surveys": StockSurvey.__table__,
    "arrivals": Arrival.__table__,
    "shipments": Shipment.__table__,
    "orders": Order.__table__,
    "generation_history": GenerationRecord.__table__,
    "coal_quality_history": LabResult.__table__,
}


# --------------------------------------------------------------------------- people (rev 0003)


class User(Base):
    """A person (or a station system) who may use the dashboard and its HTTP interface.
    Only a slow salted hash of the password is kept (`reagentplan.record.users`)."""

    __tablename__ = "users"
    __table_args__ = (UniqueConstraint("name", name="uq_users_name"),)
    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(NAME)
    role: Mapped[str] = mapped_column(String(20))
    password_hash: Mapped[str] = mapped_column(String(300))
    created_at: Mapped[dt.datetime] = mapped_column(DateTime)
    password_changed_at: Mapped[dt.datetime] = mapped_column(DateTime)


class AppSecret(Base):
    """Random keys the dashboard needs to share across restarts and processes (the key
    that signs its session cookies), made on first use."""

    __tablename__ = "app_secrets"
    name: Mapped[str] = mapped_column(String(40), primary_key=True)
    value: Mapped[str] = mapped_column(String(200))

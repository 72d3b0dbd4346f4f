"""The recorded facts: imports, surveys, arrivals, shipments, orders, generation and
lab history, and the audit trail of replaced values.

Revision ID: 0001
Revises:
"""
import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None

NAME = sa.String(200)


def _import_fk():
    return sa.Column("import_id", sa.Integer, sa.ForeignKey("imports.id"), nullable=False)


def upgrade() -> None:
    op.create_table(
        "imports",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("file_name", sa.String(500), nullable=False),
        sa.Column("file_sha256", sa.String(64), nullable=False),
        sa.Column("recorded_at", sa.DateTime, nullable=False),
        sa.Column("recorded_by", NAME, nullable=False),
        sa.Column("added", sa.Integer, nullable=False),
        sa.Column("replaced", sa.Integer, nullable=False),
    )
    op.create_table(
        "stock_surveys",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("date", sa.Date, nullable=False),
        sa.Column("store", sa.String(40), nullable=False),
        sa.Column("level_t", sa.Double, nullable=False),
        sa.Column("method", sa.String(20), nullable=True),
        sa.Column("note", sa.Text, nullable=True),
        _import_fk(),
        sa.UniqueConstraint("date", "store", name="uq_stock_surveys_key"),
    )
    op.create_table(
        "arrivals",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("date", sa.Date, nullable=False),
        sa.Column("supplier", NAME, nullable=False),
        sa.Column("mode", sa.String(20), nullable=True),
        sa.Column("loads", sa.Integer, nullable=False),
        sa.Column("tonnes", sa.Double, nullable=False),
        sa.Column("ticket", NAME, nullable=False),
        sa.Column("caco3_pct", sa.Double, nullable=True),
        _import_fk(),
        sa.UniqueConstraint("supplier", "ticket", name="uq_arrivals_key"),
    )
    op.create_table(
        "shipments",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("date", sa.Date, nullable=False),
        sa.Column("party", NAME, nullable=False),
        sa.Column("material", sa.String(40), nullable=False),
        sa.Column("mode", sa.String(20), nullable=True),
        sa.Column("loads", sa.Integer, nullable=True),
        sa.Column("tonnes", sa.Double, nullable=False),
        sa.Column("ticket", NAME, nullable=False),
        _import_fk(),
        sa.UniqueConstraint("party", "ticket", name="uq_shipments_key"),
    )
    op.create_table(
        "orders",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("order_id", NAME, nullable=False),
        sa.Column("date", sa.Date, nullable=False),
        sa.Column("supplier", NAME, nullable=False),
        sa.Column("mode", sa.String(20), nullable=True),
        sa.Column("loads", sa.Integer, nullable=False),
        sa.Column("tonnes", sa.Double, nullable=True),
        sa.Column("status", sa.String(20), nullable=False),
        _import_fk(),
        sa.UniqueConstraint("order_id", name="uq_orders_key"),
    )
    op.create_table(
        "generation_history",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("date", sa.Date, nullable=False),
        sa.Column("unit", NAME, nullable=False),
        sa.Column("mwh", sa.Double, nullable=False),
        _import_fk(),
        sa.UniqueConstraint("date", "unit", name="uq_generation_history_key"),
    )
    op.create_table(
        "coal_quality_history",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("date", sa.Date, nullable=False),
        sa.Column("source", NAME, nullable=False),
        sa.Column("sulfur_pct", sa.Double, nullable=False),
        sa.Column("ash_pct", sa.Double, nullable=True),
        sa.Column("hhv_mj_per_kg", sa.Double, nullable=True),
        _import_fk(),
        sa.UniqueConstraint("date", "source", name="uq_coal_quality_history_key"),
    )
    op.create_table(
        "replaced_values",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("import_id", sa.Integer, sa.ForeignKey("imports.id"), nullable=False),
        sa.Column("old_import_id", sa.Integer, sa.ForeignKey("imports.id"), nullable=False),
        sa.Column("sheet", sa.String(40), nullable=False),
        sa.Column("key", sa.Text, nullable=False),
        sa.Column("column", sa.String(40), nullable=False),
        sa.Column("old_value", sa.Text, nullable=True),
        sa.Column("new_value", sa.Text, nullable=True),
    )


def downgrade() -> None:
    for name in ("replaced_values", "coal_quality_history", "generation_history", "orders",
                 "shipments", "arrivals", "stock_surveys", "imports"):
        op.drop_table(name)

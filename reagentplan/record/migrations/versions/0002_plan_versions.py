"""Plan versions: the workbook a plan was made from, its summary, movements and
inventory, so two plans can be compared and a plan set against what happened.

Revision ID: 0002
Revises: 0001
"""
import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None

NAME = sa.String(200)


def upgrade() -> None:
    op.create_table(
        "workbooks",
        sa.Column("sha256", sa.String(64), primary_key=True),
        sa.Column("file_name", sa.String(500), nullable=False),
        sa.Column("content", sa.LargeBinary, nullable=False),
    )
    op.create_table(
        "plan_versions",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("created_at", sa.DateTime, nullable=False),
        sa.Column("created_by", NAME, nullable=False),
        sa.Column("as_of", sa.Date, nullable=True),
        sa.Column("start_date", sa.Date, nullable=False),
        sa.Column("horizon_days", sa.Integer, nullable=False),
        sa.Column("workbook_sha256", sa.String(64), sa.ForeignKey("workbooks.sha256"), nullable=False),
        sa.Column("fingerprint", sa.String(64), nullable=False),
        sa.Column("last_import_id", sa.Integer, nullable=True),
        sa.Column("status", sa.String(200), nullable=False),
        sa.Column("total_cost", sa.Double, nullable=False),
        sa.Column("summary_json", sa.Text, nullable=False),
    )
    op.create_table(
        "plan_movements",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("plan_id", sa.Integer, sa.ForeignKey("plan_versions.id", ondelete="CASCADE"),
                  nullable=False),
        sa.Column("date", sa.Date, nullable=False),
        sa.Column("material", sa.String(40), nullable=False),
        sa.Column("direction", sa.String(3), nullable=False),
        sa.Column("party", NAME, nullable=False),
        sa.Column("lane", NAME, nullable=False),
        sa.Column("kind", sa.String(20), nullable=False),
        sa.Column("loads", sa.Integer, nullable=True),
        sa.Column("tonnes", sa.Double, nullable=False),
        sa.Column("cost", sa.Double, nullable=False),
        sa.Column("order_by", sa.Date, nullable=True),
        sa.Column("firm", sa.Boolean, nullable=False),
        sa.Column("booked", sa.Boolean, nullable=False),
    )
    op.create_index("ix_plan_movements_plan_id", "plan_movements", ["plan_id"])
    op.create_table(
        "plan_inventory",
        sa.Column("id", sa.Integer, primary_key=True),
        sa.Column("plan_id", sa.Integer, sa.ForeignKey("plan_versions.id", ondelete="CASCADE"),
                  nullable=False),
        sa.Column("date", sa.Date, nullable=False),
        sa.Column("store", sa.String(40), nullable=False),
        sa.Column("level_t", sa.Double, nullable=False),
        sa.Column("safety_t", sa.Double, nullable=False),
        sa.Column("capacity_t", sa.Double, nullable=False),
    )
    op.create_index("ix_plan_inventory_plan_id", "plan_inventory", ["plan_id"])


def downgrade() -> None:
    op.drop_index("ix_plan_inventory_plan_id", "plan_inventory")
    op.drop_table("plan_inventory")
    op.drop_index("ix_plan_movements_plan_id", "plan_movements")
    op.drop_table("plan_movements")
    op.drop_table("plan_versions")
    op.drop_table("workbooks")

"""Verification results: one row per check of a revision's chart, with the verifier version.

Revision ID: 0002
Revises: 0001
"""

import sqlalchemy as sa
from alembic import op

revision = '0002'
down_revision = '0001'
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('check_result',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('revision_id', sa.Integer(), nullable=False),
    sa.Column('chart', sa.String(length=80), nullable=False),
    sa.Column('check_name', sa.String(length=80), nullable=False),
    sa.Column('verifier', sa.String(length=80), nullable=False),
    sa.Column('verifier_version', sa.String(length=40), nullable=False),
    sa.Column('status', sa.Enum('pass', 'skipped', 'inconclusive', 'fail', 'error', name='status', native_enum=False, length=16), nullable=False),
    sa.Column('method', sa.Enum('symbolic', 'sampled', 'none', name='method', native_enum=False, length=16), nullable=False),
    sa.Column('detail', sa.Text(), nullable=False),
    sa.Column('counterexample', sa.JSON(), nullable=True),
    sa.Column('seconds', sa.Double(), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['revision_id'], ['revision.id'], name=op.f('fk_check_result_revision_id_revision'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_check_result'))
    )
    with op.batch_alter_table('check_result', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_check_result_revision_id_chart_verifier_verifier_version'), ['revision_id', 'chart', 'verifier', 'verifier_version'], unique=False)


def downgrade() -> None:
    with op.batch_alter_table('check_result', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_check_result_revision_id_chart_verifier_verifier_version'))

    op.drop_table('check_result')

"""Drop the verification job table: verification across machines runs on Dask (verify --cluster).

Revision ID: 0004
Revises: 0003
"""

import sqlalchemy as sa
from alembic import op

revision = '0004'
down_revision = '0003'
branch_labels = None
depends_on = None


def upgrade() -> None:
    with op.batch_alter_table('job', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_job_state_attempts_priority'))

    op.drop_table('job')


def downgrade() -> None:
    # the table as 0003 made it, empty: the jobs it held were work to do, not results
    op.create_table('job',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('revision_id', sa.Integer(), nullable=False),
    sa.Column('chart', sa.String(length=80), nullable=False),
    sa.Column('verifier', sa.String(length=80), nullable=False),
    sa.Column('verifier_version', sa.String(length=40), nullable=False),
    sa.Column('state', sa.Enum('pending', 'running', 'done', 'failed', name='jobstate', native_enum=False, length=16), nullable=False),
    sa.Column('priority', sa.Integer(), nullable=False),
    sa.Column('budget', sa.Double(), nullable=False),
    sa.Column('attempts', sa.Integer(), nullable=False),
    sa.Column('max_attempts', sa.Integer(), nullable=False),
    sa.Column('worker', sa.String(length=200), nullable=True),
    sa.Column('token', sa.String(length=32), nullable=True),
    sa.Column('lease_until', sa.DateTime(timezone=True), nullable=True),
    sa.Column('error', sa.Text(), nullable=True),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('started_at', sa.DateTime(timezone=True), nullable=True),
    sa.Column('finished_at', sa.DateTime(timezone=True), nullable=True),
    sa.ForeignKeyConstraint(['revision_id'], ['revision.id'], name=op.f('fk_job_revision_id_revision'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_job')),
    sa.UniqueConstraint('revision_id', 'chart', 'verifier', 'verifier_version', name=op.f('uq_job_revision_id_chart_verifier_verifier_version'))
    )
    with op.batch_alter_table('job', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_job_state_attempts_priority'), ['state', 'attempts', 'priority'], unique=False)

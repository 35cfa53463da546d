"""Initial catalogue tables: entries, immutable revisions, charts, parameters, tags,
references and provenance.

Revision ID: 0001
Revises: (none)
"""

import sqlalchemy as sa
from alembic import op

revision = '0001'
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('entry',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('slug', sa.String(length=80), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_entry')),
    sa.UniqueConstraint('slug', name=op.f('uq_entry_slug'))
    )
    op.create_table('revision',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('entry_id', sa.Integer(), nullable=False),
    sa.Column('parent_id', sa.Integer(), nullable=True),
    sa.Column('number', sa.Integer(), nullable=False),
    sa.Column('hash', sa.String(length=64), nullable=False),
    sa.Column('title', sa.String(length=200), nullable=False),
    sa.Column('summary', sa.Text(), nullable=False),
    sa.Column('field_equations', sa.String(length=32), nullable=False),
    sa.Column('document', sa.JSON(), nullable=False),
    sa.Column('message', sa.Text(), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['entry_id'], ['entry.id'], name=op.f('fk_revision_entry_id_entry'), ondelete='CASCADE'),
    sa.ForeignKeyConstraint(['parent_id'], ['revision.id'], name=op.f('fk_revision_parent_id_revision'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_revision')),
    sa.UniqueConstraint('entry_id', 'number', name=op.f('uq_revision_entry_id_number')),
    sa.UniqueConstraint('entry_id', 'parent_id', name=op.f('uq_revision_entry_id_parent_id'))
    )
    with op.batch_alter_table('revision', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_revision_entry_id'), ['entry_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_revision_field_equations'), ['field_equations'], unique=False)
        batch_op.create_index(batch_op.f('ix_revision_hash'), ['hash'], unique=False)

    op.create_table('chart',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('revision_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=80), nullable=False),
    sa.Column('coordinates', sa.JSON(), nullable=False),
    sa.Column('domain', sa.JSON(), nullable=False),
    sa.Column('line_element', sa.Text(), nullable=True),
    sa.ForeignKeyConstraint(['revision_id'], ['revision.id'], name=op.f('fk_chart_revision_id_revision'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_chart')),
    sa.UniqueConstraint('revision_id', 'name', name=op.f('uq_chart_revision_id_name'))
    )
    with op.batch_alter_table('chart', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_chart_revision_id'), ['revision_id'], unique=False)

    op.create_table('parameter',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('revision_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=40), nullable=False),
    sa.Column('description', sa.Text(), nullable=False),
    sa.Column('assume', sa.JSON(), nullable=False),
    sa.Column('range', sa.Text(), nullable=True),
    sa.Column('default', sa.Text(), nullable=True),
    sa.ForeignKeyConstraint(['revision_id'], ['revision.id'], name=op.f('fk_parameter_revision_id_revision'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_parameter')),
    sa.UniqueConstraint('revision_id', 'name', name=op.f('uq_parameter_revision_id_name'))
    )
    with op.batch_alter_table('parameter', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_parameter_name'), ['name'], unique=False)
        batch_op.create_index(batch_op.f('ix_parameter_revision_id'), ['revision_id'], unique=False)

    op.create_table('provenance',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('revision_id', sa.Integer(), nullable=False),
    sa.Column('author', sa.String(length=200), nullable=False),
    sa.Column('source', sa.Text(), nullable=False),
    sa.Column('tool_version', sa.String(length=40), nullable=False),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['revision_id'], ['revision.id'], name=op.f('fk_provenance_revision_id_revision'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_provenance')),
    sa.UniqueConstraint('revision_id', name=op.f('uq_provenance_revision_id'))
    )
    op.create_table('reference',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('revision_id', sa.Integer(), nullable=False),
    sa.Column('position', sa.Integer(), nullable=False),
    sa.Column('citation', sa.Text(), nullable=False),
    sa.Column('doi', sa.String(length=200), nullable=True),
    sa.ForeignKeyConstraint(['revision_id'], ['revision.id'], name=op.f('fk_reference_revision_id_revision'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_reference'))
    )
    with op.batch_alter_table('reference', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_reference_revision_id'), ['revision_id'], unique=False)

    op.create_table('tag',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('revision_id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=80), nullable=False),
    sa.ForeignKeyConstraint(['revision_id'], ['revision.id'], name=op.f('fk_tag_revision_id_revision'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_tag')),
    sa.UniqueConstraint('revision_id', 'name', name=op.f('uq_tag_revision_id_name'))
    )
    with op.batch_alter_table('tag', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_tag_name'), ['name'], unique=False)
        batch_op.create_index(batch_op.f('ix_tag_revision_id'), ['revision_id'], unique=False)



def downgrade() -> None:
    with op.batch_alter_table('tag', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_tag_revision_id'))
        batch_op.drop_index(batch_op.f('ix_tag_name'))

    op.drop_table('tag')
    with op.batch_alter_table('reference', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_reference_revision_id'))

    op.drop_table('reference')
    op.drop_table('provenance')
    with op.batch_alter_table('parameter', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_parameter_revision_id'))
        batch_op.drop_index(batch_op.f('ix_parameter_name'))

    op.drop_table('parameter')
    with op.batch_alter_table('chart', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_chart_revision_id'))

    op.drop_table('chart')
    with op.batch_alter_table('revision', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_revision_hash'))
        batch_op.drop_index(batch_op.f('ix_revision_field_equations'))
        batch_op.drop_index(batch_op.f('ix_revision_entry_id'))

    op.drop_table('revision')
    op.drop_table('entry')

"""Database layer: SQLAlchemy 2 models, engine/session factory, Alembic migrations.

Large arrays never live in rows: well curves and grids are files under the data
directory, and the rows here hold their metadata and server-generated file names.
"""

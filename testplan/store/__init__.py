"""The bench store: the only package that uses SQLAlchemy and SQLModel."""

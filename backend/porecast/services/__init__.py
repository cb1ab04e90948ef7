"""Use-cases joining the API to the database, the file store and the science package.

Every function takes an open SQLAlchemy ``Session`` and the acting ``User``,
checks that the user may do it (``authz``), and raises the errors of
``porecast.services.errors``; the API layer maps those to HTTP status codes.
Callers commit; a refused request is rolled back whole.
"""

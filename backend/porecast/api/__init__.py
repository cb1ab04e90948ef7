"""JSON API under /api: FastAPI routers, pydantic schemas and auth dependencies."""

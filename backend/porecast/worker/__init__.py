"""Celery worker: the app (:mod:`.app`), the tasks (:mod:`.tasks`), the local worker of serve."""

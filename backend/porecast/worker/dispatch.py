"""Sending unit messages through Celery (the services' ``Dispatch``)."""

from __future__ import annotations

import uuid

from celery import Celery

from .app import QUEUE


class CeleryDispatch:
    """Send ``(run_id, key)`` messages by task name; revoke by task id."""

    def __init__(self, app: Celery):
        self.app = app

    def send(self, task_name: str, run_id: int, key: str) -> str:
        """Send one message and return its task id (a fresh one per message)."""
        task_id = uuid.uuid4().hex
        self.app.send_task(task_name, args=(int(run_id), str(key)), task_id=task_id,
                           queue=QUEUE)
        return task_id

    def revoke(self, task_ids: list[str]) -> None:
        """Ask workers to drop these messages if they have not started them."""
        if task_ids:
            self.app.control.revoke(task_ids)

"""The dataset version a page or a file cites: the content hash of the whole workbook, kept between writes.

Hashing the workbook reads every record, so the server keeps the files' canonical forms (per
process) and after a write serialises again only the files the write may have changed
(``DatasetVersionKeeper``); the hash is the one the snapshot holds.
"""

from __future__ import annotations

from fastapi import Request
from sqlalchemy.orm import Session

from app.exchange.snapshot import DatasetVersion, DatasetVersionKeeper

__all__ = ["cached_dataset_version"]


def cached_dataset_version(request: Request, session: Session) -> DatasetVersion:
    """Return the dataset version (SHA-256 and counts) of the data ``session`` sees."""
    keeper = getattr(request.app.state, "dataset_versions", None)
    if keeper is None:
        keeper = request.app.state.dataset_versions = DatasetVersionKeeper()
    return keeper.get(session)

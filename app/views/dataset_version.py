"""The dataset version a page or a file cites: the content hash of the whole workbook, kept per data version.

Hashing the workbook reads every record, so the server keeps the last result (per process) and
computes it again only after a write has moved the data version on.
"""

from __future__ import annotations

from fastapi import Request
from sqlalchemy.orm import Session

from app.exchange.snapshot import DatasetVersion, dataset_version
from app.store.summary import get_data_version

__all__ = ["cached_dataset_version"]


def cached_dataset_version(request: Request, session: Session) -> DatasetVersion:
    """Return the dataset version (SHA-256 and counts) of the data ``session`` sees."""
    cache = getattr(request.app.state, "dataset_versions", None)
    if cache is None:
        cache = request.app.state.dataset_versions = {}
    current = get_data_version(session=session)
    if current not in cache:
        cache.clear()
        cache[current] = dataset_version(session)
    return cache[current]

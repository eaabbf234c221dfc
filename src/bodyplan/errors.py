"""The exceptions a user can cause; the CLI prints them as one clean line."""

from __future__ import annotations


def expected_errors() -> tuple[type[BaseException], ...]:
    from .api import StoreNotFoundError, UnknownIdError
    from .ingest import CuratedDataError
    from .units import UnitError

    # ValueError covers the library's own refusals (ParameterSetError, LayoutError, AllometryError, …)
    return (StoreNotFoundError, UnknownIdError, CuratedDataError, UnitError, FileNotFoundError,
            FileExistsError, ValueError)

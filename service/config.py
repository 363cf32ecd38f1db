"""Typed settings, read from ``RATECAST_*`` environment variables (or a ``.env`` file).

:func:`get_settings` is the one way to read them: the CLI and ``uvicorn service.main:app`` call
it once; the API's routes get the settings their app was created with (``service.api.deps``).
"""

from __future__ import annotations

import os
from functools import lru_cache
from typing import Any

from pydantic import Field, SecretStr, field_validator
from pydantic_settings import BaseSettings, SettingsConfigDict

__all__ = ["Settings", "get_settings"]


class Settings(BaseSettings):
    """Everything the CLI and the API can be configured with."""

    model_config = SettingsConfigDict(env_prefix="RATECAST_", env_file=".env", extra="ignore")

    store: str = Field(
        "store",
        description=(
            "Where the posterior store is: a folder (shared or mounted ones too), a file:// URL "
            "or an s3://BUCKET/PREFIX URL (models.storage.open_store)."
        ),
    )
    max_windows: int = Field(10_000, ge=1, description="Most windows one request may ask for.")
    max_horizon_days: int = Field(400, ge=1, description="Latest window end, days after history.")
    max_body_bytes: int = Field(1_000_000, ge=1024, description="Largest request body accepted.")
    max_batch_items: int = Field(5_000, ge=1, description="Most items in one batch request.")
    work_budget: int = Field(
        50_000_000,
        ge=1,
        description=(
            "Most work one request may ask for, a whole batch counted together, in bin-draws: "
            "model bins its windows span (plus one per window) times posterior draws. 400 days "
            "of hourly bins at 2,000 draws is 19.2 million."
        ),
    )
    work_threads: int = Field(
        2, ge=1, le=64, description="Threads computing heavy answers (off the event loop)."
    )
    work_queue: int = Field(
        16,
        ge=0,
        description="Heavy requests that may wait for a thread; beyond it the answer is 503.",
    )
    deadline_seconds: float = Field(
        60.0,
        gt=0.0,
        description="Longest a request may compute; then it gets 503 and its work is abandoned.",
    )
    admin_token: SecretStr | None = Field(None, description="Bearer token for admin calls.")
    read_token: SecretStr | None = Field(
        None, description="If set, read calls need this bearer token too."
    )
    cors_origins: list[str] = Field(default_factory=list, description="Allowed CORS origins.")
    watch_seconds: float = Field(
        30.0, ge=0.0, description="Poll the store for new versions this often (0: off)."
    )

    @field_validator("store", mode="before")
    @classmethod
    def _store_as_text(cls, value: Any) -> Any:
        """A folder given as a path object is kept as its text."""
        return os.fspath(value) if isinstance(value, os.PathLike) else value


@lru_cache
def get_settings() -> Settings:
    """The process-wide settings (cached; tests build their own ``Settings``)."""
    return Settings()

"""Typed settings, read from ``RATECAST_*`` environment variables (or a ``.env`` file)."""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

from pydantic import Field, SecretStr
from pydantic_settings import BaseSettings, SettingsConfigDict

__all__ = ["Settings", "get_settings"]


class Settings(BaseSettings):
    """Everything the CLI and the API can be configured with."""

    model_config = SettingsConfigDict(env_prefix="RATECAST_", env_file=".env", extra="ignore")

    store: Path = Field(Path("store"), description="Folder of the posterior store.")
    max_windows: int = Field(10_000, ge=1, description="Most windows one request may ask for.")
    max_horizon_days: int = Field(400, ge=1, description="Latest window end, days after history.")
    max_body_bytes: int = Field(1_000_000, ge=1024, description="Largest request body accepted.")
    max_batch_items: int = Field(5_000, ge=1, description="Most items in one batch request.")
    admin_token: SecretStr | None = Field(None, description="Bearer token for admin calls.")
    read_token: SecretStr | None = Field(
        None, description="If set, read calls need this bearer token too."
    )
    cors_origins: list[str] = Field(default_factory=list, description="Allowed CORS origins.")
    watch_seconds: float = Field(
        0.0, ge=0.0, description="Poll the store for new versions this often (0: off)."
    )


@lru_cache
def get_settings() -> Settings:
    """The process-wide settings (cached; tests build their own ``Settings``)."""
    return Settings()

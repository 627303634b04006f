"""The station file's ``[store]`` table: which engine keeps the results, and the non-secret parts
of a PostgreSQL server's address.  A password is refused here: it belongs in the environment
(``PGPASSWORD``) or the PostgreSQL password file (``~/.pgpass``, ``PGPASSFILE``).
"""

from __future__ import annotations

from dataclasses import dataclass

from rig.config.reader import Section

ENGINES = ("sqlite", "postgresql")
SECRET_KEYS = ("password", "url", "dsn", "passfile")


@dataclass(frozen=True)
class StoreSettings:
    """``database`` is ``sqlite`` (the station's own file only) or ``postgresql`` (the shared
    server, with the station's own file as the buffer)."""

    database: str = "sqlite"
    host: str = ""
    port: int | None = None
    dbname: str = ""
    user: str = ""
    sslmode: str = ""
    connect_timeout_s: float | None = None

    def conninfo_parts(self) -> dict[str, str | int]:
        """The parts given, as libpq keywords; libpq fills the rest from PG* variables."""
        parts: dict[str, str | int] = {}
        for key in ("host", "dbname", "user", "sslmode"):
            value = getattr(self, key)
            if value:
                parts[key] = value
        if self.port is not None:
            parts["port"] = self.port
        if self.connect_timeout_s is not None:
            parts["connect_timeout"] = max(1, round(self.connect_timeout_s))
        return parts


def parse_store(sec: Section | None) -> StoreSettings:
    """Read ``[store]``; problems go to the document like every other key's."""
    if sec is None:
        return StoreSettings()
    for key in SECRET_KEYS:
        if sec.has(key):
            sec.raw(key)
            sec.problem(
                key,
                "credentials and server URLs do not belong in a station file; set "
                "RIG_DATABASE_URL or PGPASSWORD in the environment, or use ~/.pgpass (PGPASSFILE)",
            )
    settings = StoreSettings(
        database=sec.string("database", "sqlite", choices=ENGINES),
        host=sec.string("host", ""),
        port=sec.integer("port", None, minimum=1),
        dbname=sec.string("dbname", ""),
        user=sec.string("user", ""),
        sslmode=sec.string(
            "sslmode", "", choices=("", "disable", "allow", "prefer", "require", "verify-ca",
                                    "verify-full")
        ),
        connect_timeout_s=sec.quantity("connect_timeout", "s", None, positive=True),
    )  # fmt: skip
    if settings.port is not None and settings.port > 65535:
        sec.problem("port", f"expected a TCP port from 1 to 65535, found {settings.port}")
    sec.reject_unknown()
    return settings

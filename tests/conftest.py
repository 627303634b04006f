"""Fixtures shared by test modules: the throwaway PostgreSQL server (postgres_server.py)."""

pytest_plugins = ["postgres_server", "bench_under_test"]

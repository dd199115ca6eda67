"""Shared pytest configuration: the --long switch for soaks and fault storms."""

from __future__ import annotations

import pytest

# the throwaway PostgreSQL cluster fixtures (pg_cluster, pg_url) of the shared-store tests
pytest_plugins = ["pg_cluster"]


def pytest_addoption(parser: pytest.Parser) -> None:
    parser.addoption(
        "--long", action="store_true", default=False,
        help="also run long soaks and fault storms (marked 'long')",
    )


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    if config.getoption("--long"):
        return
    skip = pytest.mark.skip(reason="long test; run with --long")
    for item in items:
        if "long" in item.keywords:
            item.add_marker(skip)

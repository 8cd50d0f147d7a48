"""Shared fixtures: one engine and default settings for the whole test session."""

import pytest

from cationcalc.compute.models import Settings


@pytest.fixture(scope="session")
def gas() -> Settings:
    return Settings()


@pytest.fixture(scope="session")
def water() -> Settings:
    return Settings(solvent="water")

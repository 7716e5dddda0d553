"""Shared fixtures (reference data helpers live in tests/refdata.py)."""

from __future__ import annotations

import pytest

from refdata import SPECIES_DIR


@pytest.fixture(scope="session")
def database():
    """The bundled species database, loaded once."""
    from pipeline.species import load_database

    species, _ = load_database(SPECIES_DIR)
    return {sp.name: sp for sp in species}

"""Shared fixtures: a seeded RNG and a writer of small patch files."""
from __future__ import annotations

import textwrap

import numpy as np
import pytest


@pytest.fixture
def rng():
    return np.random.default_rng(seed=440)


@pytest.fixture
def write_patch(tmp_path):
    """write_patch(text, name="patch.yaml") -> path of a dedented YAML file."""

    def write(text, name="patch.yaml"):
        path = tmp_path / name
        path.write_text(textwrap.dedent(text), encoding="utf-8")
        return path

    return write

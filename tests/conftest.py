"""Shared helpers: write a case file from TOML text and run it."""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
import pytest

from layers.case import load_case
from layers.simulation import simulate

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(autouse=True)
def _private_archive_and_cache(tmp_path, monkeypatch):
    """Every test archives into, and caches under, its own temporary folder,
    never the checkout's ``runs/`` or the user's cache."""
    monkeypatch.setenv("LAYERS_ARCHIVE", str(tmp_path / "archive"))
    monkeypatch.setenv("LAYERS_CACHE_DIR", str(tmp_path / "cache"))


@pytest.fixture
def write_case(tmp_path):
    """Return a function that writes TOML text to a case file and returns its path."""

    def write(text: str, name: str = "case.toml") -> Path:
        path = tmp_path / name
        path.write_text(textwrap.dedent(text), encoding="utf-8")
        return path

    return write


@pytest.fixture
def run_text(write_case):
    """Write TOML text, load it as a case and simulate it; returns the Dataset."""

    def run(text: str):
        return simulate(load_case(write_case(text)))

    return run


def harmonic(values: np.ndarray, seconds: np.ndarray, period: float) -> complex:
    """Complex amplitude A of the fundamental, values ~ mean + Re(A exp(i w t)), over whole periods."""
    w = 2 * np.pi / period
    # rectangle rule over an exact number of periods (samples at t0 .. t0+P-dt) is exact for a harmonic
    return 2.0 * np.mean(values * np.exp(-1j * w * seconds))

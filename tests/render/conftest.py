"""Fixtures for the figure tests: Agg backend, a hand-built coverage Dataset, no network.

The Dataset is :func:`conftest.analytic_dataset` (the suite's shared helpers): the engine
contract with analytic fields; its values are test inputs, not check values.
"""

from __future__ import annotations

import socket

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import pytest  # noqa: E402
import xarray as xr  # noqa: E402

from conftest import analytic_dataset  # noqa: E402


@pytest.fixture
def dataset() -> xr.Dataset:
    """A 10-degree global contract Dataset."""
    return analytic_dataset()


@pytest.fixture(autouse=True)
def offline_and_tidy(monkeypatch, tmp_path_factory):
    """No network, no cartopy download, an empty cartopy data folder; no figure left open.

    Yields the cartopy data folder so a test can check that nothing was written into it.
    """
    import cartopy
    import cartopy.io

    data_dir = tmp_path_factory.mktemp("cartopy_data")
    monkeypatch.setitem(cartopy.config, "data_dir", data_dir)
    monkeypatch.setitem(cartopy.config, "pre_existing_data_dir", data_dir)

    def refuse(*args, **kwargs):
        raise AssertionError("a figure tried to download data or open a network connection")

    monkeypatch.setattr(cartopy.io.Downloader, "acquire_resource", refuse)
    monkeypatch.setattr(socket.socket, "connect", refuse)
    yield data_dir
    left_open = plt.get_fignums()
    plt.close("all")
    assert left_open == [], f"figures left open: {left_open}"

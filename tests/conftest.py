import os
import pathlib

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_bearings"


@pytest.fixture
def write_sheet(tmp_path):
    """Write text (or bytes) to a sheet file and return its path."""
    def _write(content, name="sheet.csv"):
        p = tmp_path / name
        if isinstance(content, bytes):
            p.write_bytes(content)
        else:
            p.write_text(content, encoding="utf-8")
        return p
    return _write


@pytest.fixture(autouse=True)
def _no_network(monkeypatch):
    # Tests must work offline: make any accidental socket connection fail loudly.
    import socket

    real = socket.socket.connect

    def guard(self, address, *a, **k):
        host = address[0] if isinstance(address, tuple) else address
        if isinstance(host, str) and (host.startswith("127.") or host in ("localhost", "::1")) or not isinstance(address, tuple):
            return real(self, address, *a, **k)
        raise RuntimeError(f"test tried to reach the network: {address}")

    monkeypatch.setattr(socket.socket, "connect", guard)
    os.environ.setdefault("PROJ_NETWORK", "OFF")

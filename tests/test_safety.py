"""Safe by default: the server listens on loopback only, sends no usage statistics, keeps XSRF
protection on and caps uploads."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from tests.browser_support import ROOT, formwise_server

CONFIG = ROOT / ".streamlit" / "config.toml"


def test_config_defaults_are_safe() -> None:
    config = tomllib.loads(CONFIG.read_text())
    assert config["server"]["address"] == "127.0.0.1"
    assert config["server"]["enableXsrfProtection"] is True
    assert 0 < config["server"]["maxUploadSize"] <= 1024
    assert config["browser"]["gatherUsageStats"] is False


def _listening_addresses(port: int) -> list[str]:
    """Local addresses of sockets listening on ``port``, read from the kernel's tables
    (/proc/net/tcp and tcp6: state 0A is LISTEN; addresses are little-endian hex)."""
    found = []
    for table in ("/proc/net/tcp", "/proc/net/tcp6"):
        path = Path(table)
        if not path.exists():
            continue
        for line in path.read_text().splitlines()[1:]:
            fields = line.split()
            address, port_hex = fields[1].split(":")
            if int(port_hex, 16) == port and fields[3] == "0A":
                found.append(address)
    return found


def _is_loopback(hex_address: str) -> bool:
    if len(hex_address) == 8:  # IPv4, e.g. 0100007F is 127.0.0.1
        return hex_address[-2:] == "7F"
    # IPv6 ::1 reads 00000000000000000000000001000000; ::ffff:127.0.0.1 reads
    # 0000000000000000FFFF00000100007F.
    return hex_address == "00000000000000000000000001000000" or (
        hex_address[:24] == "0000000000000000FFFF0000" and hex_address[-2:] == "7F"
    )


def test_loopback_reading_rejects_wildcard_addresses() -> None:
    assert _is_loopback("0100007F")
    assert not _is_loopback("00000000")  # 0.0.0.0: every interface
    assert not _is_loopback("00000000000000000000000000000000")  # ::
    assert _is_loopback("0000000000000000FFFF00000100007F")


@pytest.mark.skipif(not Path("/proc/net/tcp").exists(), reason="needs Linux's /proc/net/tcp to read listening sockets")
def test_server_is_not_reachable_on_a_non_loopback_address_by_default() -> None:
    with formwise_server() as url:
        port = int(url.rsplit(":", 1)[1])
        addresses = _listening_addresses(port)
        assert addresses, "the server should be listening"
        # A socket bound to 0.0.0.0 (00000000) or :: would accept connections from the network.
        assert all(_is_loopback(a) for a in addresses), addresses

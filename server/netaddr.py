"""The laptop's address on the local network, found without any internet."""

from __future__ import annotations

import socket

LOOPBACK = "127.0.0.1"
# connect() on a UDP socket only picks the outgoing interface: no packet is sent.
_PROBE = ("10.255.255.255", 1)


def lan_address() -> str:
    """IPv4 address phones on the router can reach; 127.0.0.1 when there is no network."""
    try:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as probe:
            probe.connect(_PROBE)
            address = probe.getsockname()[0]
    except OSError:
        return LOOPBACK
    return address if address and not address.startswith("0.") else LOOPBACK


def reachable_host(bind_host: str) -> str:
    """The host to print for a server bound to ``bind_host``."""
    if bind_host in ("0.0.0.0", "", "::"):
        return lan_address()
    return bind_host

"""Addresses a phone on the same network can open, for a server listening on ``host``.

A server bound to every interface (0.0.0.0 or ::) is reached at this machine's own addresses, never
at 0.0.0.0. The outgoing address is found by pointing a UDP socket at a documentation address
(RFC 5737 TEST-NET-1): ``connect`` on UDP picks a route and sends nothing.
"""

from __future__ import annotations

import socket

WILDCARD_HOSTS = frozenset({"0.0.0.0", "::", ""})
_PROBE = ("192.0.2.1", 9)        # RFC 5737 documentation address; nothing is sent


def reachable_addresses(host: str) -> tuple[str, ...]:
    """``(host,)`` for a named host; for a wildcard, this machine's addresses (outgoing one first)."""
    if host not in WILDCARD_HOSTS:
        return (host,)
    found: list[str] = []
    try:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as probe:
            probe.connect(_PROBE)
            found.append(probe.getsockname()[0])
    except OSError:
        pass
    try:
        found += [info[4][0] for info in socket.getaddrinfo(socket.gethostname(), None, socket.AF_INET)]
    except OSError:
        pass
    usable = [a for a in dict.fromkeys(found) if not a.startswith("127.") and a != "0.0.0.0"]
    return tuple(usable) or ("127.0.0.1",)

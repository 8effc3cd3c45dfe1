"""The app's printed address is one a phone can open: never the wildcard 0.0.0.0 (issue 11 item 10)."""

import ipaddress

from fieldtl.addresses import reachable_addresses


def test_a_named_host_is_printed_as_given():
    assert reachable_addresses("127.0.0.1") == ("127.0.0.1",)
    assert reachable_addresses("192.168.1.20") == ("192.168.1.20",)


def test_the_wildcard_becomes_this_machines_addresses():
    for wildcard in ("0.0.0.0", "::"):
        found = reachable_addresses(wildcard)
        assert found and "0.0.0.0" not in found
        for address in found:       # each one a concrete IPv4 address (RFC 791), not unspecified
            assert not ipaddress.ip_address(address).is_unspecified

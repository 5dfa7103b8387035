"""This machine's network addresses, for ``serve --lan`` to print and to put
in the pairing QR code.

The addresses come from the operating system through ``ifaddr`` (Linux,
macOS, Windows alike); nothing is sent anywhere.
"""
from __future__ import annotations

import ipaddress


def usable(address: str) -> bool:
    """An IPv4 address another device on the network could reach."""
    try:
        ip = ipaddress.ip_address(address)
    except ValueError:
        return False
    return ip.version == 4 and not (ip.is_loopback or ip.is_link_local or ip.is_unspecified
                                    or ip.is_multicast)


def lan_addresses() -> list[str]:
    """This machine's IPv4 addresses other than loopback and link-local,
    private ones (home and hotspot networks) first."""
    import ifaddr
    found: set[str] = set()
    try:
        adapters = ifaddr.get_adapters()
    except OSError:          # no permission to list interfaces: print none
        adapters = []
    for adapter in adapters:
        for ip in adapter.ips:
            if isinstance(ip.ip, str) and usable(ip.ip):   # IPv6 entries are tuples
                found.add(ip.ip)
    return sorted(found, key=lambda a: (not ipaddress.ip_address(a).is_private,
                                        ipaddress.ip_address(a)))

"""Trap every way out to the network (test helper): each call raises and is recorded."""

from __future__ import annotations

import socket

import pytest


def trap_network(patch: pytest.MonkeyPatch) -> list[str]:
    """Make socket connects and name lookups raise; return the list the attempted calls are recorded in.

    Every network connection goes through socket.socket.connect/connect_ex, socket.create_connection
    or socket.getaddrinfo (Python's socket module), so trapping these four catches any attempt.
    """
    calls: list[str] = []

    def trap(name):
        def refuse(*args, **kwargs):
            calls.append(name)
            raise OSError(f"network used: {name}")

        return refuse

    for owner, name in (
        (socket.socket, "connect"),
        (socket.socket, "connect_ex"),
        (socket, "getaddrinfo"),
        (socket, "create_connection"),
    ):
        patch.setattr(owner, name, trap(name))
    return calls

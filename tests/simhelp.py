"""Helpers for tests that drive the simulated tester directly."""

from contextlib import contextmanager
from urllib.parse import urlencode

from glowtrace.link import Link
from glowtrace.tester import Tester
from glowtrace.transport import open_port


def sim_url(**settings) -> str:
    return "glowsim://?" + urlencode(settings)


@contextmanager
def sim_tester(**settings):
    port = open_port(sim_url(**settings))
    try:
        tester = Tester(Link(port), "sim")
        tester.identify()
        yield tester
    finally:
        port.close()

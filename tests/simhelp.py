"""Helpers for tests that drive the simulated tester directly."""

from contextlib import contextmanager
from urllib.parse import urlencode

from glowtrace.tester.driver import connect


def sim_url(**settings) -> str:
    return "glowsim://?" + urlencode(settings)


@contextmanager
def sim_tester(**settings):
    with connect(sim_url(**settings)) as tester:
        yield tester


class WrappedPort:
    """A serial port passed through, for test and benchmark wrappers that
    watch or damage what is read (subclasses override read)."""

    def __init__(self, port):
        self.port = port

    def __getattr__(self, name):
        return getattr(self.port, name)

    @property
    def timeout(self):
        return self.port.timeout

    @timeout.setter
    def timeout(self, v):
        self.port.timeout = v

    def read(self, n):
        return self.port.read(n)

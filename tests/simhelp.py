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

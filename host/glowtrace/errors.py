"""Exceptions the CLI turns into one-line messages and a non-zero exit."""


class GlowtraceError(Exception):
    """Base of every error a user can cause or fix."""


class LinkError(GlowtraceError):
    """The serial link failed or the device did not answer."""


class DeviceError(GlowtraceError):
    """The tester refused a command or reported a fault."""


class StoreError(GlowtraceError):
    """The database cannot be used as asked."""


class SetupError(GlowtraceError):
    """Something the tool needs is missing (an executable, a data file)."""

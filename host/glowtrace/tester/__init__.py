"""The tester: everything that talks to it and describes what it sends.

The serial transport (and the `glowsim://` URL scheme of the simulated tester,
registered here so that any user of this room can open it), the link's frames,
the driver, the raw capture exactly as received and its conversion to amps
and volts, finding ports, socket wiring, the simulator's launcher, calibration,
the self-test and the firmware install. The first room of the flow: it may
import only the shared top-level modules (paths, errors, catalogue, config)."""

from . import transport  # noqa: F401  (registers glowsim://)

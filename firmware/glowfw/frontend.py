# Front-end numbers (schematics/frontend.json, copied to the board's flash as
# frontend.json): what a converter code means in amps and volts. Both board
# layers use these helpers so that they convert the same way.
import json


def load(path):
    with open(path) as f:
        return json.load(f)


def channel_names(fe, fitted_optional=()):
    return [c["name"] for c in fe["channels"]
            if not c.get("optional") or c["name"] in fitted_optional]


def counts(fe):
    return 1 << fe["adc"]["bits"]


def full_scale_a(fe, range_name):
    r = fe["current_ranges"][range_name]
    return fe["adc"]["vref_v"] * r["amps_per_volt"]


def amps_to_code(fe, range_name, amps):
    """Nominal converter code for a current (zero offset, nominal gain)."""
    v = amps / fe["current_ranges"][range_name]["amps_per_volt"]
    code = int(v / fe["adc"]["vref_v"] * counts(fe))
    return min(code, counts(fe) - 1)

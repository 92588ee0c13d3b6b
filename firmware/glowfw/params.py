# Command parameters from the host: defaults filled in, unknown keys refused.


class ParamError(Exception):
    pass


def merge(defaults, raw, what):
    """defaults updated from raw; an unknown key is an error naming `what`."""
    if not isinstance(raw, dict):
        raise ParamError(what + " parameters must be an object")
    p = dict(defaults)
    for k in raw:
        if k not in p:
            raise ParamError("unknown " + what + " parameter: " + k)
        p[k] = raw[k]
    return p

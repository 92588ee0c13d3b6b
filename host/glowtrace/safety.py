"""Cautions shown where advice could hurt someone: the sets series-string
tubes come out of, a hot part after a test. Wording of our own; it defers to
local electrical codes and licensed practice."""

MAINS_CHASSIS = (
    "Caution: series-string and AC/DC sets (the usual home of this type) often have a "
    "chassis tied to the mains. Work on such a set only through an isolation transformer, "
    "follow your local electrical codes, and leave mains work to a licensed person where "
    "they require it. The tester itself runs from an isolated, current-limited bench "
    "supply (SELV): never from the set.")

# how long a part stays too hot to touch after a test: rough figures of our
# own for glass tubes and power resistors in still air, to say "wait", not
# a thermal model
HOT_WAIT_MIN = ((3.0, 2), (10.0, 5), (float("inf"), 10))  # (heater W up to, minutes)


def series_string(kind) -> bool:
    """A type made for series-string heaters (a rated controlled warm-up)."""
    return kind.controlled_warmup_s is not None


def hot_after(watts: float, what: str = "The tube", min_w: float = 1.0) -> str | None:
    """A caution after heating something of this power, or None when it is
    too small to matter."""
    if watts < min_w:
        return None
    minutes = next(m for w, m in HOT_WAIT_MIN if watts <= w)
    return (f"{what} is hot (about {watts:.0f} W for the test): let it cool about "
            f"{minutes} min before handling it, or use a glove.")

# Adaptive end of a capture: the current has settled once it has stayed
# within a relative band of a reference value for a hold time.


class SettleDetector:
    def __init__(self, band, hold_us, min_us):
        self.band = band
        self.hold_us = hold_us
        self.min_us = min_us
        self.ref = None
        self.ref_t = 0

    def update(self, t_us, value):
        """Feed a block mean (offset removed); True once settled."""
        if self.ref is None or abs(value - self.ref) > self.band * abs(self.ref):
            self.ref = value
            self.ref_t = t_us
            return False
        return t_us - self.ref_t >= self.hold_us and t_us >= self.min_us

# Physical model of one heater section for the simulated tester.
#
# Three thermal nodes:
#   wire    the heater wire and its insulation inside the cathode sleeve (fast,
#           a fraction of a second)
#   sleeve  the cathode sleeve, radiating to the room (slow, seconds)
#   exposed a share of the wire that heats without the sleeve's thermal mass
#           (the part of a heater that flashes); radiates on its own
# Resistance of each wire part follows tungsten (tungsten.py) scaled per type:
#   R(T) = R20_part * (1 + k * (ratio_W(T) - 1))
# with k chosen so that the hot/cold ratio of the type holds at the hot wire
# temperature (heater alloys have lower coefficients than pure tungsten).
# Integration: exponential Euler per node, stable for any step.
import math

WIRE_OVER_SLEEVE_K = 150.0  # default: wire this much hotter than its sleeve when hot


class HeaterSection:
    def __init__(self, tungsten, rated_v, rated_a, hot_cold_ratio=6.5,
                 tau_wire_s=0.08, tau_sleeve_s=4.0, flash_share=0.0,
                 tau_flash_s=0.12, ambient_c=22.0, wire_over_sleeve_k=WIRE_OVER_SLEEVE_K):
        self.w = tungsten
        self.ta = ambient_c + 273.15
        r_hot = rated_v / rated_a
        p_hot = rated_v * rated_a
        t_hot = tungsten.temperature(hot_cold_ratio)
        t_hot = min(max(t_hot, 1150.0), 1800.0)
        self.k = (hot_cold_ratio - 1.0) / (tungsten.ratio(t_hot) - 1.0)
        r20 = r_hot / hot_cold_ratio
        f = flash_share
        self.r20_main = (1.0 - f) * r20
        self.r20_exp = f * r20
        p_main = (1.0 - f) * p_hot
        t_sleeve = t_hot - wire_over_sleeve_k
        self.t_sleeve_hot = t_sleeve
        self.g_ws = p_main / wire_over_sleeve_k
        self.k_s = p_main / (t_sleeve ** 4 - self.ta ** 4)
        self.c_s = tau_sleeve_s * 4.0 * self.k_s * t_sleeve ** 3
        self.c_w = tau_wire_s * self.g_ws
        if f > 0:
            p_exp = f * p_hot
            self.k_x = p_exp / (t_hot ** 4 - self.ta ** 4)
            self.c_x = tau_flash_s * 4.0 * self.k_x * t_hot ** 3
        else:
            self.k_x = 0.0
            self.c_x = 1.0
        self.t_hot = t_hot
        self.reset()
        self.extra_ohm = 0.0      # contact or fault resistance in series
        self.fault = None         # None, "open", "short" or "load" (a resistor)
        self.load_ohm = 0.0

    def reset(self):
        self.tw = self.ta
        self.ts = self.ta
        self.tx = self.ta

    def _alloy(self, t):
        return 1.0 + self.k * (self.w.ratio(t) - 1.0)

    def resistance(self):
        if self.fault == "open":
            return 1e9
        if self.fault == "short":
            return 0.005 + self.extra_ohm
        if self.fault == "load":
            return self.load_ohm + self.extra_ohm
        r = self.r20_main * self._alloy(self.tw) + self.extra_ohm
        if self.r20_exp:
            r += self.r20_exp * self._alloy(self.tx)
        return r

    def step(self, amps, h):
        """Advance h seconds with this current flowing (0 when off)."""
        if self.fault is not None:
            return  # an open, short or resistor in the socket has no heater to warm
        i2 = amps * amps
        # wire: Joule heat in, conduction to the sleeve out
        p_w = i2 * self.r20_main * self._alloy(self.tw)
        t_eq = self.ts + p_w / self.g_ws
        self.tw = t_eq + (self.tw - t_eq) * math.exp(-h * self.g_ws / self.c_w)
        # sleeve: conduction in, radiation out (linearised about now)
        ts = self.ts
        net = self.g_ws * (self.tw - ts) - self.k_s * (ts ** 4 - self.ta ** 4)
        a = self.g_ws + 4.0 * self.k_s * ts ** 3
        t_eq = ts + net / a
        self.ts = t_eq + (ts - t_eq) * math.exp(-h * a / self.c_s)
        # exposed share: Joule heat in, its own radiation out
        if self.r20_exp:
            tx = self.tx
            net = i2 * self.r20_exp * self._alloy(tx) - self.k_x * (tx ** 4 - self.ta ** 4)
            a = 4.0 * self.k_x * tx ** 3
            t_eq = tx + net / a
            self.tx = t_eq + (tx - t_eq) * math.exp(-h * a / self.c_x)

    def light(self):
        """Relative visible-near-IR glow seen by a photodiode (Wien's
        approximation at 900 nm: exp(-hc / (lambda k T)), hc/(lambda k) =
        16000 K), 1.0 for the whole section when it has settled hot."""
        f = self.r20_exp / (self.r20_exp + self.r20_main)
        ref = ((1.0 - f) * math.exp(-16000.0 / self.t_sleeve_hot)
               + f * math.exp(-16000.0 / self.t_hot))
        glow = (1.0 - f) * math.exp(-16000.0 / self.ts) + f * math.exp(-16000.0 / self.tx)
        return glow / ref

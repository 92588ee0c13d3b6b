# Tungsten resistance ratio against temperature for the simulated heater,
# interpolated in the table host/glowtrace/data/tungsten_resistivity.csv
# (Forsythe & Worthing 1925, values typed from memory; see the file).
# MicroPython: no numpy here, plain linear interpolation.

T20_K = 293.15


class Tungsten:
    def __init__(self, csv_path):
        ts = []
        rs = []
        with open(csv_path) as f:
            for line in f:
                line = line.strip()
                if not line or line[0] == "#" or line[0].isalpha():
                    continue
                t, r = line.split(",")
                ts.append(float(t))
                rs.append(float(r))
        self.t = ts
        self.rho = rs
        self.rho20 = self.resistivity(T20_K)

    def resistivity(self, t_k):
        ts = self.t
        rs = self.rho
        if t_k <= ts[0]:
            i = 0
        elif t_k >= ts[-1]:
            i = len(ts) - 2
        else:
            i = int((t_k - ts[0]) // (ts[1] - ts[0]))  # the table is evenly spaced
            if i > len(ts) - 2:
                i = len(ts) - 2
        f = (t_k - ts[i]) / (ts[i + 1] - ts[i])
        return rs[i] + f * (rs[i + 1] - rs[i])

    def ratio(self, t_k):
        """Resistance at t_k over resistance at 20 C."""
        return self.resistivity(t_k) / self.rho20

    def temperature(self, ratio):
        """Inverse of ratio() by bisection (monotonic table)."""
        lo = 200.0
        hi = 3000.0
        for _ in range(50):
            mid = 0.5 * (lo + hi)
            if self.ratio(mid) < ratio:
                lo = mid
            else:
                hi = mid
        return 0.5 * (lo + hi)

"""A cheap per-observation gate: fast-vs-slow exponential means say 'something may be changing'.

The full change-point scoring is costly (a window of arrays), so it runs only on minutes the gate
opens. The gate only decides when to look, never what was found, and errs on the side of looking.
Each channel's threshold scales with that channel's own recent wander (the typical size of its
fast-minus-slow deviation over the last hour or so), so a gusty or drifting station does not
keep the gate open and a quiet one is not missed.
"""

from __future__ import annotations

FAST = 0.5  # ~2-minute memory
SLOW = 0.06  # ~16-minute memory
WANDER = 0.02  # ~50-minute memory of the deviation size
K2 = 9.0  # open when the squared deviations, in units of their usual wander, sum past 3^2
# Floors below which a change is never interesting (T and Td in degC, wind vector in m/s).
FLOOR_T = 0.25
FLOOR_W = 1.0
NAN = float("nan")


class Gate:
    """Channels: temperature, dewpoint, wind u, wind v. T and Td are compared with their own drift."""

    __slots__ = ("f", "s", "drift", "wander", "primed")

    def __init__(self) -> None:
        self.f = [NAN, NAN, NAN, NAN]
        self.s = [NAN, NAN, NAN, NAN]
        self.drift = [0.0, 0.0]  # slow mean of (fast - slow) for T and Td: the diurnal trend's lag
        self.wander = [0.1, 0.1, 0.5]  # typical |deviation| of T, Td and the wind vector
        self.primed = 0

    def update(self, x0: float, x1: float, x2: float, x3: float) -> bool:
        """Feed one sample (NaN = missing); True if any channel moved well beyond its usual wander."""
        f, s = self.f, self.s
        for i, xi in ((0, x0), (1, x1), (2, x2), (3, x3)):
            if xi == xi:
                if f[i] == f[i]:
                    f[i] += FAST * (xi - f[i])
                    s[i] += SLOW * (xi - s[i])
                else:
                    f[i] = s[i] = xi
        if self.primed < 15:
            self.primed += 1
            return False
        drift, wander = self.drift, self.wander
        # A front moves several channels at once, noise mostly one: combine them before deciding.
        z2 = 0.0
        devs = [0.0, 0.0, 0.0]
        for i in (0, 1):
            d = f[i] - s[i]
            if d == d:
                dev = abs(d - drift[i])
                drift[i] += SLOW * (d - drift[i])
                devs[i] = dev
                if dev > FLOOR_T:
                    z2 += (dev / wander[i]) ** 2
        du = f[2] - s[2]
        dv = f[3] - s[3]
        if du == du and dv == dv:
            dw = (du * du + dv * dv) ** 0.5
            devs[2] = dw
            if dw > FLOOR_W:
                z2 += (dw / wander[2]) ** 2
        if z2 > K2:
            return True
        for i in (0, 1, 2):
            wander[i] += WANDER * (max(devs[i], 0.02) - wander[i])
        return False

    def state(self) -> list[list[float] | int]:
        return [list(self.f), list(self.s), list(self.drift), list(self.wander), self.primed]

    def set_state(self, st: list) -> None:  # type: ignore[type-arg]
        self.f, self.s, self.drift, self.wander = (list(map(float, v)) for v in st[:4])
        self.primed = int(st[4])

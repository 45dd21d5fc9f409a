"""A cheap per-observation gate: fast-vs-slow exponential means say 'something may be changing'.

The full change-point scoring is costly (a window of arrays), so it runs only on minutes the gate
opens. The gate decides when to look, not what was found, but how often it looks matters: each
evaluation is another chance for a wobble to pass the classifier, so a more eager gate finds a few
more fronts and many more false ones in noisy air (measured, docs/tuning.md "stop 18"). K2 is
part of the detector's specificity, not only of its cost.
Each channel's threshold scales with that channel's own recent wander (the typical size of its
fast-minus-slow deviation over the last hour or so), so a gusty or drifting station does not
keep the gate open and a quiet one is not missed. Written out channel by channel: it runs for
every observation. frontwatch/scan.py repeats it as a compiled loop for offline replay: change
both (tests/test_core_batch.py fails when they differ).
"""

from __future__ import annotations

FAST = 0.5  # ~2-minute memory
SLOW = 0.06  # ~16-minute memory
WANDER = 0.02  # ~50-minute memory of the deviation size
K2 = 12.0  # open when the squared deviations, in units of their usual wander, sum past about 3.5^2
# Floors below which a change is never interesting (T and Td in degC, wind vector in m/s).
FLOOR_T = 0.25
FLOOR_W = 1.0
MIN_WANDER = 0.02
NAN = float("nan")


class Gate:
    """Channels: temperature, dewpoint, wind u, wind v. T and Td are compared with their own drift."""

    __slots__ = ("ft", "st", "fd", "sd", "fu", "su", "fv", "sv", "drift_t", "drift_d", "w_t", "w_d", "w_w",
                 "primed")

    def __init__(self) -> None:
        self.ft = self.st = self.fd = self.sd = NAN
        self.fu = self.su = self.fv = self.sv = NAN
        self.drift_t = self.drift_d = 0.0  # slow mean of (fast - slow): the diurnal trend's lag
        self.w_t = self.w_d = 0.1  # typical |deviation| of T, Td
        self.w_w = 0.5  # and of the wind vector
        self.primed = 0

    def update(self, t: float, d: float, u: float, v: float) -> bool:
        """Feed one sample (NaN = missing); True if the channels moved well beyond their usual wander."""
        z2 = 0.0
        if t == t:
            if self.ft == self.ft:
                self.ft += FAST * (t - self.ft)
                self.st += SLOW * (t - self.st)
                x = self.ft - self.st
                dev = abs(x - self.drift_t)
                self.drift_t += SLOW * (x - self.drift_t)
                if dev > FLOOR_T:
                    z2 += (dev / self.w_t) ** 2
                self.w_t += WANDER * (max(dev, MIN_WANDER) - self.w_t)
            else:
                self.ft = self.st = t
        if d == d:
            if self.fd == self.fd:
                self.fd += FAST * (d - self.fd)
                self.sd += SLOW * (d - self.sd)
                x = self.fd - self.sd
                dev = abs(x - self.drift_d)
                self.drift_d += SLOW * (x - self.drift_d)
                if dev > FLOOR_T:
                    z2 += (dev / self.w_d) ** 2
                self.w_d += WANDER * (max(dev, MIN_WANDER) - self.w_d)
            else:
                self.fd = self.sd = d
        if u == u and v == v:
            if self.fu == self.fu:
                self.fu += FAST * (u - self.fu)
                self.su += SLOW * (u - self.su)
                self.fv += FAST * (v - self.fv)
                self.sv += SLOW * (v - self.sv)
                du = self.fu - self.su
                dv = self.fv - self.sv
                dw = (du * du + dv * dv) ** 0.5
                if dw > FLOOR_W:
                    z2 += (dw / self.w_w) ** 2
                self.w_w += WANDER * (max(dw, MIN_WANDER) - self.w_w)
            else:
                self.fu = self.su = u
                self.fv = self.sv = v
        if self.primed < 15:
            self.primed += 1
            return False
        return z2 > K2

    def state(self) -> list[float]:
        return [getattr(self, k) for k in self.__slots__]

    def set_state(self, st: list[float]) -> None:
        for k, v in zip(self.__slots__, st, strict=True):
            setattr(self, k, float(v) if k != "primed" else int(v))

"""Expansion of a plan into time samples: what altitude and pressure each person breathes when.

:func:`expand` turns an :class:`~altox.plan.profile.ExpeditionPlan` or
:class:`~altox.plan.profile.FlightPlan` into a :class:`Timeline` of equal-length numpy arrays.

Sampling
--------
Samples lie on a grid of ``plan.sample_every_h`` from the plan's start, and are also cut at
every change of the model (arrival at a camp, the start and end of the high point, the start
of the night, the end of a leg), so a sample never straddles two states; samples next to such
a cut are shorter than ``sample_every``.  Quantities that change within a sample (a climbing
aircraft) are taken at the sample's midpoint, the mean of a linear ramp.

Expedition day model
--------------------
Time 0 is midnight at the start of day 1; day ``d`` runs from ``24 (d - 1)`` to ``24 d`` h.

* 00:00-06:00 asleep at the previous night's sleeping altitude (``start_altitude`` for day 1);
* 06:00-14:00 awake there (breakfast, the first half of the day's travel);
* 14:00-22:00 awake at the day's ``sleep`` altitude (arrival in camp at 14:00);
* 22:00-24:00 asleep at the day's ``sleep`` altitude (the night continues into the next day).

With ``high`` the party is at ``high`` for ``hours_high`` (default 1 h) centred on 14:00
(``14 - hours_high/2`` to ``14 + hours_high/2``), replacing that part of the day; at most 16 h
(06:00-22:00).  Travel between altitudes is a step, not a ramp.  The pressure is the plan's
(or the day's) atmosphere at that altitude; a day's measured ``pressure`` replaces the model
wherever the party is at that day's sleeping site (the evening, the night and the next
morning).  A day's ``oxygen`` applies to its nights (22:00-06:00 after the day) for
``when: sleep``, to its high point for ``when: climb``, and to all of the day and the night
after it for ``when: all``.

Flight model
------------
Time 0 is the start of the first leg.  Climb and descent legs change pressure altitude
linearly from the previous leg's end to the leg's ``altitude``; other legs keep it.  The
cabin pressure is

* unpressurized aircraft and ground legs: the outside pressure;
* pressurized, leg without ``cabin``: ``min(max(P_out, P(max_cabin_altitude)), P_out + max_differential)``;
* pressurized, leg with ``cabin``: ``max(P(cabin), P_out)`` (the cabin is never above the aircraft),

all in the ICAO standard atmosphere, with flight levels, elevations and cabin altitudes read as
pressure altitudes.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from altox.physiology.atmosphere import (altitude_for_pressure, barometric_pressure, pressure_altitude_ft,
                                         pressure_altitude_ft_to_mmhg)
from altox.plan.profile import ExpeditionPlan, FlightPlan
from altox.units import M_PER_FT

__all__ = ["Timeline", "expand", "cabin_crossings", "OXYGEN_NONE", "OXYGEN_CREW", "OXYGEN_PATIENT", "OXYGEN_ALL",
           "OXYGEN_CODES", "OXYGEN_NAMES", "NIGHT_START_H", "NIGHT_END_H", "ARRIVAL_H"]

#: Oxygen codes in :attr:`Timeline.oxygen`: who breathes supplemental oxygen in the sample.
OXYGEN_NONE = 0
OXYGEN_CREW = 1
OXYGEN_PATIENT = 2
OXYGEN_ALL = 3
OXYGEN_CODES = {"none": OXYGEN_NONE, "crew": OXYGEN_CREW, "patient": OXYGEN_PATIENT,
                "all": OXYGEN_ALL}
OXYGEN_NAMES = {code: name for name, code in OXYGEN_CODES.items()}

NIGHT_START_H = 22.0   # clock hour the night starts
NIGHT_END_H = 6.0      # clock hour the night ends
ARRIVAL_H = 14.0       # clock hour of arrival at the new camp / centre of the high point

_EPS_H = 1e-9


@dataclass(frozen=True)
class Timeline:
    """A plan as time samples; every array has one entry per sample.

    Attributes
    ----------
    kind : {'expedition', 'flight'}
    time_h : ndarray of float
        Start of each sample, from the start of the plan. [h]
    duration_h : ndarray of float
        Length of each sample (``sample_every`` or shorter at a change of state). [h]
    leg : ndarray of int
        Index of the day (``plan.days[i]``) or leg (``plan.legs[i]``) the sample belongs to,
        0-based; also indexes :attr:`leg_labels`.
    altitude_m : ndarray of float
        Geometric altitude the people breathe at: the party's altitude, or the cabin
        altitude of a flight as geometric ISA altitude. [m]
    aircraft_altitude_m : ndarray of float
        Flights: the aircraft's pressure altitude as geometric ISA altitude; expeditions:
        equal to ``altitude_m``. [m]
    pb_mmhg : ndarray of float
        Barometric (expeditions) or cabin (flights) pressure. [mmHg]
    sleeping : ndarray of bool
        Expeditions: the nights (22:00-06:00); flights: all False.
    oxygen : ndarray of int8
        Who is on supplemental oxygen: :data:`OXYGEN_NONE` (0), :data:`OXYGEN_CREW` (1),
        :data:`OXYGEN_PATIENT` (2) or :data:`OXYGEN_ALL` (3); expeditions use 0 or 3.
    cabin_pressure_altitude_ft : ndarray of float
        Flights: pressure altitude of the cabin pressure; expeditions: ``altitude_m`` in
        feet. [ft]
    leg_labels : list of str
        One label per day or leg: ``"Day 3 trek to 3,700 m"``, ``"Leg 2 climb to FL370"``.
    """

    kind: str
    time_h: np.ndarray
    duration_h: np.ndarray
    leg: np.ndarray
    altitude_m: np.ndarray
    aircraft_altitude_m: np.ndarray
    pb_mmhg: np.ndarray
    sleeping: np.ndarray
    oxygen: np.ndarray
    cabin_pressure_altitude_ft: np.ndarray
    leg_labels: list = field(default_factory=list)
    #: flights: the aircraft's pressure altitude [ft] of each sample (None for expeditions)
    aircraft_pressure_altitude_ft: np.ndarray | None = None

    _ARRAYS = ("time_h", "duration_h", "leg", "altitude_m", "aircraft_altitude_m", "pb_mmhg",
               "sleeping", "oxygen", "cabin_pressure_altitude_ft")

    def __post_init__(self):
        n = len(self.time_h)
        for name in self._ARRAYS:
            arr = getattr(self, name)
            if arr.shape != (n,):
                raise ValueError(f"Timeline.{name} has shape {arr.shape}, expected ({n},)")
            arr.setflags(write=False)

    def __len__(self) -> int:
        return len(self.time_h)

    @property
    def end_h(self) -> np.ndarray:
        """End of each sample. [h]"""
        return self.time_h + self.duration_h

    @property
    def total_duration_h(self) -> float:
        """Sum of the sample durations: the plan's length. [h]"""
        return float(self.duration_h.sum())

    def of_leg(self, index: int) -> np.ndarray:
        """Boolean mask of the samples of one day or leg."""
        return self.leg == index


def _fmt_alt_ft(ft: float) -> str:
    if ft >= 17999.5:
        return f"FL{round(ft / 100):03d}"
    return f"{ft:,.0f} ft"


def _sample_bounds(cuts: np.ndarray, total_h: float, dt_h: float) -> np.ndarray:
    """Sample boundaries: the dt grid merged with the cuts; [0, ..., total]."""
    n_grid = int(np.floor(total_h / dt_h + _EPS_H))
    grid = np.arange(n_grid + 1, dtype=float) * dt_h
    bounds = np.unique(np.concatenate([grid, cuts, [0.0, total_h]]))
    bounds = bounds[(bounds >= 0.0) & (bounds <= total_h)]
    keep = np.concatenate([[True], np.diff(bounds) > 1e-7])
    bounds = bounds[keep]
    bounds[-1] = total_h
    if len(bounds) >= 2 and bounds[-1] - bounds[-2] <= 1e-7:
        bounds = np.delete(bounds, -2)
    return bounds


def _expand_expedition(plan: ExpeditionPlan) -> Timeline:
    days = plan.days
    # sites: -1 = start, i = the night after day i
    def site_atmosphere(i):
        return plan.atmosphere if i < 0 else (days[i].atmosphere or plan.atmosphere)

    def site_altitude(i):
        return plan.start_altitude_m if i < 0 else days[i].sleep_m

    def site_pressure(i):
        return None if i < 0 else days[i].pressure_mmhg

    def oxygen_for(i, what):
        if i < 0 or days[i].oxygen is None:
            return False
        when = days[i].oxygen.when
        return when == "all" or when == what

    seg = []  # (start_h, end_h, day_index, altitude_m, sleeping, atmosphere, measured, oxygen)
    labels = []
    for i, day in enumerate(days):
        t0 = 24.0 * i
        prev, new = i - 1, i
        if day.high_m is not None:
            hh = day.hours_high_h if day.hours_high_h is not None else 1.0
            h1, h2 = ARRIVAL_H - hh / 2.0, ARRIVAL_H + hh / 2.0
        else:
            h1 = h2 = ARRIVAL_H
        parts = [
            (0.0, NIGHT_END_H, prev, True),
            (NIGHT_END_H, h1, prev, False),
            (h1, h2, None, False),
            (h2, NIGHT_START_H, new, False),
            (NIGHT_START_H, 24.0, new, True),
        ]
        for a, b, site, asleep in parts:
            if b - a <= _EPS_H:
                continue
            if site is None:  # the high point
                oxy = oxygen_for(i, "climb")
                seg.append((t0 + a, t0 + b, i, day.high_m, False,
                            day.atmosphere or plan.atmosphere, None, oxy))
            else:
                if asleep:
                    oxy = oxygen_for(site, "sleep")
                else:
                    oxy = oxygen_for(i, "all")
                seg.append((t0 + a, t0 + b, i, site_altitude(site), asleep,
                            site_atmosphere(site), site_pressure(site), oxy))
        text = {"rest": "rest at", "fly-in": "fly in to", "drive": "drive to",
                "descent": "descend to", "climb": "climb to", "trek": "trek to"}[day.activity]
        label = f"Day {day.day} {text} {day.sleep_m:,.0f} m"
        if day.high_m is not None:
            label += f" (high {day.high_m:,.0f} m)"
        labels.append(label)

    seg_start = np.array([s[0] for s in seg])
    seg_end = np.array([s[1] for s in seg])
    seg_alt = np.array([s[3] for s in seg], dtype=float)
    seg_pb = np.empty(len(seg))
    for atmosphere in ("mountain", "isa"):
        mask = np.array([s[5] == atmosphere for s in seg])
        if mask.any():
            seg_pb[mask] = barometric_pressure(seg_alt[mask], atmosphere)
    for k, s in enumerate(seg):
        if s[6] is not None:
            seg_pb[k] = s[6]

    total_h = plan.total_duration_h
    bounds = _sample_bounds(np.concatenate([seg_start, seg_end]), total_h, plan.sample_every_h)
    time_h = bounds[:-1]
    duration_h = np.diff(bounds)
    mid = time_h + duration_h / 2.0
    k = np.clip(np.searchsorted(seg_end, mid, side="right"), 0, len(seg) - 1)
    altitude_m = seg_alt[k]
    return Timeline(
        kind="expedition",
        time_h=time_h,
        duration_h=duration_h,
        leg=np.array([s[2] for s in seg], dtype=np.int64)[k],
        altitude_m=altitude_m,
        aircraft_altitude_m=altitude_m.copy(),
        pb_mmhg=seg_pb[k],
        sleeping=np.array([s[4] for s in seg], dtype=bool)[k],
        oxygen=np.where(np.array([s[7] for s in seg], dtype=bool)[k], OXYGEN_ALL,
                        OXYGEN_NONE).astype(np.int8),
        cabin_pressure_altitude_ft=altitude_m / M_PER_FT,
        leg_labels=labels,
    )


def _flight_leg_times(plan: FlightPlan):
    """(start_h, end_h, durations_h) of every leg; the last end is exactly the plan's length."""
    durations = np.array([leg.duration_h for leg in plan.legs], dtype=float)
    leg_end_h = np.cumsum(durations)
    leg_start_h = leg_end_h - durations
    leg_end_h[-1] = float(leg_end_h[-1])
    return leg_start_h, leg_end_h, durations


def _cabin_mmhg(plan: FlightPlan, p_out: np.ndarray, k: np.ndarray) -> np.ndarray:
    """Cabin pressure [mmHg] for outside pressures ``p_out`` on legs ``k`` (the model above)."""
    legs = plan.legs
    ac = plan.aircraft
    p_cabin = p_out.copy()
    if not ac.pressurized:
        return p_cabin
    stated_ft = np.array([np.nan if leg.cabin_pressure_altitude_m is None
                          else leg.cabin_pressure_altitude_m / M_PER_FT for leg in legs])[k]
    has_stated = ~np.isnan(stated_ft)
    if has_stated.any():
        p_stated = np.asarray(pressure_altitude_ft_to_mmhg(stated_ft[has_stated]), dtype=float)
        p_cabin[has_stated] = np.maximum(p_stated, p_out[has_stated])
    sched = ~has_stated
    if sched.any():
        if ac.max_differential_mmhg is None:  # pragma: no cover - the plan validator forbids it
            raise ValueError("pressurized aircraft without max_differential on a leg without cabin")
        p_max_cab = float(pressure_altitude_ft_to_mmhg(ac.max_cabin_altitude_ft))
        p_cabin[sched] = np.minimum(np.maximum(p_out[sched], p_max_cab),
                                    p_out[sched] + ac.max_differential_mmhg)
    ground = np.array([leg.phase == "ground" for leg in legs])[k]
    p_cabin[ground] = p_out[ground]
    return p_cabin


def _flight_on(plan: FlightPlan, bounds: np.ndarray) -> Timeline:
    """The flight on the intervals between ``bounds`` [h], each taken at its mid-point."""
    legs = plan.legs
    ends = plan.leg_altitudes_m()
    leg_start_h, leg_end_h, durations = _flight_leg_times(plan)
    time_h = bounds[:-1]
    duration_h = np.diff(bounds)
    mid = time_h + duration_h / 2.0
    k = np.clip(np.searchsorted(leg_end_h, mid, side="right"), 0, len(legs) - 1)

    a0 = np.array([e[0] for e in ends])[k]
    a1 = np.array([e[1] for e in ends])[k]
    frac = np.clip((mid - leg_start_h[k]) / durations[k], 0.0, 1.0)
    aircraft_pa_ft = (a0 + (a1 - a0) * frac) / M_PER_FT
    p_out = np.asarray(pressure_altitude_ft_to_mmhg(aircraft_pa_ft), dtype=float)
    p_cabin = _cabin_mmhg(plan, p_out, k)

    labels = []
    for i, (leg, (s, e)) in enumerate(zip(legs, ends)):
        if leg.phase in ("climb", "descent"):
            labels.append(f"Leg {i + 1} {leg.phase} to {_fmt_alt_ft(e / M_PER_FT)}")
        elif leg.phase == "ground":
            labels.append(f"Leg {i + 1} ground at {_fmt_alt_ft(e / M_PER_FT)}")
        else:
            labels.append(f"Leg {i + 1} {leg.phase} {_fmt_alt_ft(e / M_PER_FT)}")

    oxygen = np.array([OXYGEN_CODES[leg.oxygen] for leg in legs], dtype=np.int8)[k]
    cabin_ft = np.asarray(pressure_altitude_ft(p_cabin), dtype=float)
    return Timeline(
        kind="flight",
        time_h=time_h,
        duration_h=duration_h,
        leg=k.astype(np.int64),
        altitude_m=np.asarray(altitude_for_pressure(p_cabin, "isa"), dtype=float),
        aircraft_altitude_m=np.asarray(altitude_for_pressure(p_out, "isa"), dtype=float),
        pb_mmhg=p_cabin,
        sleeping=np.zeros(len(time_h), dtype=bool),
        oxygen=oxygen,
        cabin_pressure_altitude_ft=cabin_ft,
        leg_labels=labels,
        aircraft_pressure_altitude_ft=aircraft_pa_ft,
    )


def _expand_flight(plan: FlightPlan) -> Timeline:
    _, leg_end_h, _ = _flight_leg_times(plan)
    return _flight_on(plan, _sample_bounds(leg_end_h, float(leg_end_h[-1]), plan.sample_every_h))


def cabin_crossings(plan: FlightPlan, thresholds_ft, aircraft_thresholds_ft=()) -> Timeline:
    """The flight cut at every leg end and every exact time its cabin crosses a threshold.

    Within a leg the aircraft's pressure altitude changes linearly with time, and the cabin
    pressure altitude is a non-decreasing function of it (the cabin model above), so the
    cabin crosses a threshold ``x`` only where the aircraft is at ``x`` itself (cabin at the
    aircraft's altitude, or a stated cabin) or, on the differential-limited part of a
    pressurization schedule, where the outside pressure is ``P(x) - max_differential``.  Those
    times are found in closed form; each piece between them lies wholly above or wholly at
    or below every threshold, so the time above a threshold summed over the pieces is exact
    and does not depend on ``sample_every``.

    Parameters
    ----------
    plan : FlightPlan
    thresholds_ft : sequence of float
        Cabin pressure altitudes [ft] whose crossings cut the flight.
    aircraft_thresholds_ft : sequence of float
        Aircraft pressure altitudes [ft] (flight levels) whose crossings also cut it.

    Returns
    -------
    Timeline
        One entry per piece, each taken at its mid-point (independent of ``sample_every``).
    """
    if not isinstance(plan, FlightPlan):
        raise TypeError(f"cabin_crossings() takes a FlightPlan, not {type(plan).__name__}")
    leg_start_h, leg_end_h, durations = _flight_leg_times(plan)
    ends = np.asarray(plan.leg_altitudes_m(), dtype=float) / M_PER_FT   # (legs, 2) [ft]
    x_ft = np.unique(np.asarray(list(thresholds_ft), dtype=float))
    aircraft_ft = [x_ft]
    ac = plan.aircraft
    if ac.pressurized and ac.max_differential_mmhg is not None and x_ft.size:
        p_x = np.asarray(pressure_altitude_ft_to_mmhg(x_ft), dtype=float) - ac.max_differential_mmhg
        if np.any(p_x > 0):
            aircraft_ft.append(np.asarray(pressure_altitude_ft(p_x[p_x > 0]), dtype=float))
    aircraft_ft.append(np.asarray(list(aircraft_thresholds_ft), dtype=float))
    cand = np.concatenate(aircraft_ft)
    a0, a1 = ends[:, 0:1], ends[:, 1:2]
    moving = (a1 != a0)[:, 0]
    cuts = [np.concatenate([[0.0], leg_end_h])]
    if cand.size and moving.any():
        frac = (cand[None, :] - a0[moving]) / (a1[moving] - a0[moving])
        inside = (frac > 0.0) & (frac < 1.0)
        t = leg_start_h[moving][:, None] + frac * durations[moving][:, None]
        cuts.append(t[inside])
    bounds = np.unique(np.concatenate(cuts))
    bounds = bounds[np.concatenate([[True], np.diff(bounds) > 1e-12])]
    bounds[-1] = float(leg_end_h[-1])
    return _flight_on(plan, bounds)


def expand(plan) -> Timeline:
    """Expand a plan into time samples.

    Parameters
    ----------
    plan : ExpeditionPlan or FlightPlan
        A validated plan (from :func:`altox.plan.profile.load_plan`).

    Returns
    -------
    Timeline
        One entry per sample; see the module docstring for the day and cabin models.

    Raises
    ------
    TypeError
        ``plan`` is not a plan.
    """
    if isinstance(plan, ExpeditionPlan):
        return _expand_expedition(plan)
    if isinstance(plan, FlightPlan):
        return _expand_flight(plan)
    raise TypeError(f"expand() takes an ExpeditionPlan or FlightPlan, not {type(plan).__name__}")

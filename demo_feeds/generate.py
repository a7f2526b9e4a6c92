#!/usr/bin/env python3
"""Deterministic generator of tallyd's demo feeds. All data are invented.

Usage:  python3 demo_feeds/generate.py [--out DIR]      (DIR defaults to this script's folder)

Writes moth_traps.csv, sensor_counts.csv and events.csv. The output is a pure
function of SEED below: every random draw comes from random.Random streams
seeded with integers and only their .random() and .gauss() methods are used
(the other distribution methods of the random module are not promised to stay
the same across Python versions). Poisson, gamma and negative-binomial draws
are implemented here, and floats are written with fixed decimals, so the files
are byte-identical on any Python 3.9 or later.

Scenario 1, moth_traps.csv: pheromone traps for a moth pest in an invented
orchard district in a river valley. 24 traps in three zones of 8:
  orchard-nNN  north bench (cooler, fewer moths),
  orchard-cNN  valley floor,
  orchard-sNN  south slope, bordering abandoned orchards (warmer, most moths).
Seasons 2023, 2024 and 2025; each trap is hung in mid-March and taken down in
mid-November, and checked every 3 to 10 days on its own irregular schedule.
One record per check: exposure = trap-nights since the previous check (or since
hanging); a trap found knocked down (about 1 check in 40) counted only the
nights before it fell, so its exposure is smaller. temperature_c = mean daily
air temperature at the trap over the check interval. Expected catch per night:
    trap level x exp(flight season + 0.12 per year + 0.06 per degC over 15 degC)
where the flight season is a two-harmonic annual curve peaking in mid-August
(a July-September flight). Counts are negative binomial, size 3 to 8 by trap.
Injected in 2025: invasions at orchard-s02 (x6, 5 checks from 16 June) and
orchard-c05 (x5, 6 checks from 4 August); the lure of orchard-n04 expires on
19 July, after which the trap catches 5% of the expected moths until take-down.
Not an event: the temperature logger of orchard-c07 fails for 3 checks from
20 May 2024, leaving temperature_c empty there.

Scenario 2, sensor_counts.csv: six acoustic insect counters along two field
hedgerows (hedge-a1..a3, hedge-b1..b3) of an invented farm, 5-minute bins from
2025-07-02T00:00Z to 2025-07-14T00:00Z. Each record is stamped at the end of
its bin; exposure = minutes of sensor uptime in the bin (5.0 normally).
Activity has a strong daily cycle (a three-harmonic daily curve: lowest around
02:00 UTC, a plateau through the day, a peak near dusk, 19:00-20:30 UTC) times
sensor level times a slowly varying weather factor; counts are negative
binomial with size 25 (mildly overdispersed). Outages (not events):
  hedge-a3  battery flat 2025-07-05T16:21:00Z to 2025-07-07T16:21:00Z: no records,
            partial bins (exposure 1.0 and 4.0) at both ends;
  hedge-b2  microphone fault 2025-07-08T11:52:30Z to 21:52:30Z: a partial bin
            (2.5), then 7 bins logged with exposure 0 (count 0) before the
            logger powered down, no records until the restart, partial bin (2.5).
Injected: a swarm passing hedge-b1 on 2025-07-10 from 13:40 to 14:40 UTC
(up to about 40 extra insects per bin).

events.csv lists the injected episodes as series,start,end: the times of the
first and the last record affected (both inclusive).
"""

import argparse
import datetime as dt
import math
import os
import random

SEED = 41877  # the one seed every stream below is derived from

UTC = dt.timezone.utc


# ---------------------------------------------------------------- random draws

def stream(*keys):
    """An independent-enough random stream for one part of the data."""
    s = SEED
    for k in keys:
        s = s * 1000003 + k
    return random.Random(s)


def uniform(rng, lo, hi):
    return lo + (hi - lo) * rng.random()


def uniform_int(rng, lo, hi):
    """Integer in [lo, hi], both inclusive."""
    return lo + min(int(rng.random() * (hi - lo + 1)), hi - lo)


def _poisson_inversion(rng, mu):
    # Sequential search of the CDF; used for mu <= 30 only, where exp(-mu) is
    # comfortably representable.
    u = rng.random()
    k = 0
    p = math.exp(-mu)
    cdf = p
    while u > cdf and k < 1000:
        k += 1
        p *= mu / k
        cdf += p
    return k


def poisson(rng, mu):
    """Poisson draw; a mean above 30 is split into pieces of 30 (sum of Poissons)."""
    if mu <= 0:
        return 0
    k = 0
    while mu > 30.0:
        k += _poisson_inversion(rng, 30.0)
        mu -= 30.0
    return k + _poisson_inversion(rng, mu)


def gamma(rng, shape, scale):
    """Gamma draw by Marsaglia and Tsang (2000)."""
    if shape < 1.0:
        u = rng.random()
        while u <= 0.0:
            u = rng.random()
        return gamma(rng, shape + 1.0, scale) * u ** (1.0 / shape)
    d = shape - 1.0 / 3.0
    c = 1.0 / math.sqrt(9.0 * d)
    while True:
        x = rng.gauss(0.0, 1.0)
        v = 1.0 + c * x
        if v <= 0.0:
            continue
        v = v * v * v
        u = rng.random()
        if u <= 0.0:
            continue
        if math.log(u) < 0.5 * x * x + d - d * v + d * math.log(v):
            return d * v * scale


def negbin(rng, mu, size):
    """NB2 draw with mean mu and Var = mu + mu^2 / size, as a gamma-Poisson mixture."""
    if mu <= 0:
        return 0
    return poisson(rng, gamma(rng, size, mu / size))


# ---------------------------------------------------------------- formatting

def fmt_time(t):
    return t.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def write_csv(path, comments, header, rows):
    with open(path, "w", encoding="ascii", newline="\n") as f:
        for c in comments:
            f.write("# " + c + "\n" if c else "#\n")
        f.write(",".join(header) + "\n")
        for r in rows:
            f.write(",".join(r) + "\n")


# ---------------------------------------------------------------- moth traps

YEARS = (2023, 2024, 2025)
YEAR_DAYS = 365.25
TREND_ORIGIN = dt.date(2023, 1, 1)
TREND_PER_YEAR = 0.12        # log catch per year: the pest is slowly building up
TEMP_SLOPE = 0.06            # log catch per degC of daily mean temperature
TEMP_REFERENCE = 15.0        # degC at which the temperature term is zero
FLIGHT_PEAK_DOY = 228        # day of year (0 = 1 Jan) of the flight peak, mid-August
FLIGHT_H1 = 1.3              # amplitude of the annual harmonic of log catch
FLIGHT_H2 = 0.6              # amplitude of the half-year harmonic (narrows the peak)

# Zones: (letter, name, temperature offset degC, log of the zone's catch per night)
ZONES = (
    ("n", "north bench", -1.0, math.log(0.35)),
    ("c", "valley floor", 0.0, math.log(0.5)),
    ("s", "south slope", 1.2, math.log(0.8)),
)
TRAPS_PER_ZONE = 8
KNOCKDOWN_PROB = 0.025

INVASIONS = (  # (trap, first check on or after, number of checks, factor on the expected catch)
    ("orchard-s02", dt.date(2025, 6, 16), 5, 6.0),
    ("orchard-c05", dt.date(2025, 8, 4), 6, 5.0),
)
LURE_EXPIRY = ("orchard-n04", dt.date(2025, 7, 19), 0.05)  # nights from this date catch 5%
LOGGER_FAULT = ("orchard-c07", dt.date(2024, 5, 20), 3)    # checks with temperature_c empty


def day_of_year(d):
    return (d - dt.date(d.year, 1, 1)).days


def climate_temperature(d):
    """Long-run mean daily temperature of the valley, coldest around 20 January."""
    return 11.5 - 10.5 * math.cos(2.0 * math.pi * (day_of_year(d) - 20) / YEAR_DAYS)


def flight_season(d):
    x = 2.0 * math.pi * (day_of_year(d) - FLIGHT_PEAK_DOY) / YEAR_DAYS
    return FLIGHT_H1 * math.cos(x) + FLIGHT_H2 * math.cos(2.0 * x)


def regional_weather():
    """Daily temperature anomaly shared by the district: AR(1), sd 2.8 degC, lag-1 corr 0.75."""
    rng = stream(1, 0)
    first, last = dt.date(2022, 12, 1), dt.date(2025, 12, 31)
    phi, sd = 0.75, 2.8
    a = rng.gauss(0.0, sd)
    out = {}
    d = first
    while d <= last:
        a = phi * a + rng.gauss(0.0, sd * math.sqrt(1.0 - phi * phi))
        out[d] = a
        d += dt.timedelta(days=1)
    return out


def moth_traps():
    weather = regional_weather()
    traps = []
    for zi, (letter, _name, t_off, log_level) in enumerate(ZONES):
        for j in range(1, TRAPS_PER_ZONE + 1):
            traps.append((f"orchard-{letter}{j:02d}", zi, t_off, log_level, j))

    rows = []  # (datetime, series, count, exposure, temperature text)
    events = []
    stats = {"knocked_down": 0, "missing_temperature": 0}
    for ti, (trap, zi, t_off, log_level, j) in enumerate(traps):
        rng_trap = stream(2, ti)
        level = log_level + rng_trap.gauss(0.0, 0.35)
        size = uniform(rng_trap, 3.0, 8.0)
        micro = rng_trap.gauss(0.0, 0.3)                  # microsite temperature offset
        typical_gap = uniform(rng_trap, 4.0, 8.0)         # this trap's usual days between checks
        route_minutes = 6 * 60 + 30 + 100 * zi + 11 * j   # usual time of the visit, UTC
        rng = stream(3, ti)                               # schedule and knock-downs of this trap
        rng_temp = stream(4, ti)                          # local temperature noise
        rng_count = stream(5, ti)                         # catch noise

        for year in YEARS:
            hung = dt.date(year, 3, 10) + dt.timedelta(days=uniform_int(rng, 0, 10))
            removal = dt.date(year, 11, 8) + dt.timedelta(days=uniform_int(rng, 0, 12))
            checks = []
            prev = hung
            while True:
                gap = int(round(typical_gap + 1.8 * rng.gauss(0.0, 1.0)))
                gap = max(3, min(10, gap))
                d = prev + dt.timedelta(days=gap)
                if d > removal:
                    break
                checks.append((prev, d))
                prev = d

            invasion = [x for x in INVASIONS if x[0] == trap and x[1].year == year]
            inv_left = invasion[0][2] if invasion else 0
            fault_left = LOGGER_FAULT[2] if LOGGER_FAULT[0] == trap and LOGGER_FAULT[1].year == year else 0
            inv_first = inv_last = lure_first = lure_last = None

            for prev, d in checks:
                nights = (d - prev).days
                days = [prev + dt.timedelta(days=k) for k in range(nights)]
                temps = [climate_temperature(x) + t_off + micro + weather[x] + rng_temp.gauss(0.0, 0.7)
                         for x in days]
                counted = nights
                if nights > 1 and rng.random() < KNOCKDOWN_PROB:
                    counted = uniform_int(rng, 1, nights - 1)
                    stats["knocked_down"] += 1
                mu = 0.0
                lure_hit = False
                for x, temp in zip(days[:counted], temps[:counted]):
                    m = math.exp(level + flight_season(x)
                                 + TREND_PER_YEAR * (x - TREND_ORIGIN).days / YEAR_DAYS
                                 + TEMP_SLOPE * (temp - TEMP_REFERENCE))
                    if trap == LURE_EXPIRY[0] and x >= LURE_EXPIRY[1]:
                        m *= LURE_EXPIRY[2]
                        lure_hit = True
                    mu += m
                minute = route_minutes + uniform_int(rng, -20, 20)
                when = dt.datetime(d.year, d.month, d.day, minute // 60, minute % 60, tzinfo=UTC)
                if inv_left and d >= invasion[0][1]:
                    mu *= invasion[0][3]
                    inv_left -= 1
                    inv_first = inv_first or when
                    inv_last = when
                if lure_hit:
                    lure_first = lure_first or when
                    lure_last = when
                count = negbin(rng_count, mu, size)
                temp_text = f"{sum(temps) / nights:.1f}"
                if fault_left and d >= LOGGER_FAULT[1]:
                    temp_text = ""
                    fault_left -= 1
                    stats["missing_temperature"] += 1
                rows.append((when, trap, str(count), str(counted), temp_text))

            if inv_first:
                factor = invasion[0][3]
                events.append((trap, inv_first, inv_last,
                               f"invasion: x{factor:g} the expected catch for {invasion[0][2]} checks"))
            if lure_first:
                events.append((trap, lure_first, lure_last,
                               f"lure expired {LURE_EXPIRY[1].isoformat()}: "
                               f"{LURE_EXPIRY[2] * 100:g}% of the expected catch until take-down"))
    rows.sort(key=lambda r: (r[0], r[1]))
    return rows, events, stats


# ---------------------------------------------------------------- acoustic sensors

SENSOR_START = dt.datetime(2025, 7, 2, 0, 0, tzinfo=UTC)
SENSOR_DAYS = 12
BIN = dt.timedelta(minutes=5)
SENSORS = ("hedge-a1", "hedge-a2", "hedge-a3", "hedge-b1", "hedge-b2", "hedge-b3")
SENSOR_SIZE = 25.0   # NB size of the 5-minute counts
# Log activity per minute over the day (hour h in UTC): c0 + sum_k a_k cos(k w h) + b_k sin(k w h)
DAILY_C0 = -0.35
DAILY_HARMONICS = ((-0.90, -1.04), (-0.39, -0.78), (-0.21, -0.14))

# Downtime: (sensor, down from, up again, bins with exposure 0 logged after the failure)
OUTAGES = (
    ("hedge-a3", dt.datetime(2025, 7, 5, 16, 21, 0, tzinfo=UTC),
     dt.datetime(2025, 7, 7, 16, 21, 0, tzinfo=UTC), 0),
    ("hedge-b2", dt.datetime(2025, 7, 8, 11, 52, 30, tzinfo=UTC),
     dt.datetime(2025, 7, 8, 21, 52, 30, tzinfo=UTC), 7),
)
SWARM = ("hedge-b1", dt.datetime(2025, 7, 10, 13, 40, tzinfo=UTC),
         dt.timedelta(minutes=60), 8.0)  # peak extra insects per minute, half-sine in time


def daily_log_rate(t):
    h = (t - t.replace(hour=0, minute=0, second=0)).total_seconds() / 3600.0
    w = 2.0 * math.pi / 24.0
    v = DAILY_C0
    for k, (a, b) in enumerate(DAILY_HARMONICS, start=1):
        v += a * math.cos(k * w * h) + b * math.sin(k * w * h)
    return v


def swarm_extra(t0, t1):
    """Extra insects per minute from the swarm, averaged over [t0, t1), by the midpoint rule per minute."""
    start, length, peak = SWARM[1], SWARM[2], SWARM[3]
    total = 0.0
    n = int((t1 - t0).total_seconds() // 60)
    for i in range(n):
        m = t0 + dt.timedelta(minutes=i + 0.5)
        x = (m - start).total_seconds() / length.total_seconds()
        if 0.0 < x < 1.0:
            total += peak * math.sin(math.pi * x)
    return total / n


def sensor_counts():
    nbins = SENSOR_DAYS * 24 * 12
    # Weather: hourly AR(1) of log activity shared by the farm, sd 0.15, lag-1 corr 0.9.
    rng_w = stream(6, 0)
    weather = []
    a = rng_w.gauss(0.0, 0.15)
    for _ in range(SENSOR_DAYS * 24):
        a = 0.9 * a + rng_w.gauss(0.0, 0.15 * math.sqrt(1.0 - 0.81))
        weather.append(a)

    rows = []
    events = []
    stats = {"zero_exposure": 0, "partial": 0}
    for si, sensor in enumerate(SENSORS):
        rng_s = stream(7, si)
        level = rng_s.gauss(0.0, 0.3)
        rng = stream(8, si)
        outage = [o for o in OUTAGES if o[0] == sensor]
        zero_left = outage[0][3] if outage else 0
        sw_first = sw_last = None
        for i in range(nbins):
            t0 = SENSOR_START + i * BIN
            t1 = t0 + BIN
            uptime = 5.0
            if outage:
                down, up = outage[0][1], outage[0][2]
                lost = (min(t1, up) - max(t0, down)).total_seconds() / 60.0
                if lost > 0:
                    uptime = 5.0 - lost
            if uptime <= 0.0:
                if zero_left and t0 >= outage[0][1]:
                    zero_left -= 1
                    stats["zero_exposure"] += 1
                    rows.append((t1, sensor, "0", "0.0"))
                continue
            if uptime < 5.0:
                stats["partial"] += 1
            mid = t0 + BIN / 2
            per_minute = math.exp(daily_log_rate(mid) + level + weather[i // 12])
            if sensor == SWARM[0]:
                extra = swarm_extra(t0, t1)
                if extra > 0:
                    per_minute += extra
                    sw_first = sw_first or t1
                    sw_last = t1
            # Uptime is assumed to be a leading or trailing part of the bin; the
            # rate barely changes within 5 minutes, so mean = rate x uptime.
            count = negbin(rng, per_minute * uptime, SENSOR_SIZE)
            rows.append((t1, sensor, str(count), f"{uptime:.1f}"))
        if sw_first:
            events.append((sensor, sw_first, sw_last,
                           f"swarm: up to {SWARM[3] * 5:g} extra insects per bin for 1 hour"))
    rows.sort(key=lambda r: (r[0], r[1]))
    return rows, events, stats


# ---------------------------------------------------------------- main

def main():
    here = os.path.dirname(os.path.abspath(__file__))
    ap = argparse.ArgumentParser(description="Regenerate tallyd's invented demo feeds.")
    ap.add_argument("--out", default=here, help="output folder (default: this script's folder)")
    args = ap.parse_args()
    os.makedirs(args.out, exist_ok=True)

    moth_rows, moth_events, moth_stats = moth_traps()
    write_csv(
        os.path.join(args.out, "moth_traps.csv"),
        [
            "Invented demo data for tallyd, written by generate.py (seed %d). Not real observations." % SEED,
            "Pheromone-trap checks in an invented valley orchard district, seasons 2023-2025.",
            "exposure = trap-nights since the previous check; temperature_c = mean daily air temperature",
            "over the check interval (empty = logger fault). Injected events: see README.md and events.csv.",
        ],
        ("time", "series", "count", "exposure", "temperature_c"),
        [(fmt_time(t), s, c, e, tc) for t, s, c, e, tc in moth_rows],
    )

    sensor_rows, sensor_events, sensor_stats = sensor_counts()
    write_csv(
        os.path.join(args.out, "sensor_counts.csv"),
        [
            "Invented demo data for tallyd, written by generate.py (seed %d). Not real observations." % SEED,
            "Acoustic insect counters on two hedgerows of an invented farm, 5-minute bins stamped at bin end.",
            "exposure = minutes of sensor uptime in the bin; exposure 0 = no effort (skipped by tallyd).",
            "Injected events: see README.md and events.csv.",
        ],
        ("time", "series", "count", "exposure"),
        [(fmt_time(t), s, c, e) for t, s, c, e in sensor_rows],
    )

    events = sorted(moth_events + sensor_events, key=lambda e: (e[1], e[0]))
    write_csv(
        os.path.join(args.out, "events.csv"),
        [],
        ("series", "start", "end"),
        [(s, fmt_time(a), fmt_time(b)) for s, a, b, _kind in events],
    )

    print(f"moth_traps.csv: {len(moth_rows)} records "
          f"({moth_stats['knocked_down']} knocked-down checks, "
          f"{moth_stats['missing_temperature']} without temperature)")
    print(f"sensor_counts.csv: {len(sensor_rows)} records "
          f"({sensor_stats['zero_exposure']} with exposure 0, {sensor_stats['partial']} partial bins)")
    print("events.csv:")
    for s, a, b, kind in events:
        print(f"  {s:12s} {fmt_time(a)}  {fmt_time(b)}  {kind}")


if __name__ == "__main__":
    main()

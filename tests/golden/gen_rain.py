"""Golden values for rain attenuation from the `itur` package (version 0.4).

Oracle: itur.models.itu838.rain_specific_attenuation (ITU-R P.838-3) and
itur.models.itu618.rain_attenuation (ITU-R P.618-13, section 2.2.1.1), with
the recommendation versions set explicitly below.

The rain height h_R of step 1 is taken from itur.models.itu839.rain_height
(ITU-R P.839) at each location and written to the file, so that the engine,
which takes h_R as an input, evaluates the same path. The rain rate R0.01 and
the station height are given explicitly, so P.837 and P.1511 are not used.

Rows with an empty attenuation_db check P.838-3 alone (frequencies above the
55 GHz limit of the P.618 method).

Regenerate with:
    python3 tests/golden/gen_rain.py > tests/golden/rain.csv
"""
import csv
import sys
import warnings

import itur
import itur.models.itu618 as itu618
import itur.models.itu838 as itu838
import itur.models.itu839 as itu839

assert itur.__version__.startswith("0.4"), itur.__version__
itu838.change_version(3)
itu618.change_version(13)
assert itu838.get_version() == 3
assert itu618.get_version() == 13

# Arbitrary points (latitude, longitude, station height km); they span the
# |lat| < 36 and |lat| >= 36 branches of steps 7 and 10.
SITES = [
    (3.7, 23.1, 0.05),
    (-14.2, -63.5, 0.15),
    (19.6, 77.4, 0.01),
    (31.8, -8.3, 0.4),
    (43.9, 11.6, 0.1),
    (55.1, 48.2, 0.2),
    (-39.5, 171.3, 0.03),
    (63.7, -104.9, 0.0),
]
FREQS_GHZ = [4.0, 12.0, 20.0, 30.0, 45.0, 55.0]
ELEVATIONS = [3.0, 10.0, 30.0, 55.0, 85.0]
PERCENTS = [0.001, 0.01, 0.1, 1.0, 3.0]
RATES = [12.0, 42.0, 95.0]
TILTS = [0.0, 45.0, 90.0]

w = csv.writer(sys.stdout, lineterminator="\n")
w.writerow([
    "f_ghz", "rain_rate_mm_h", "elevation_deg", "tilt_deg", "latitude_deg",
    "rain_height_km", "station_height_km", "percent",
    "specific_db_per_km", "attenuation_db",
])

warnings.simplefilter("ignore")
i = 0
for si, (lat, lon, hs) in enumerate(SITES):
    hr = float(itu839.rain_height(lat, lon).value)
    for fi, f in enumerate(FREQS_GHZ):
        for ei, el in enumerate(ELEVATIONS):
            # A deterministic walk through the other parameters.
            p = PERCENTS[(si + fi + ei) % len(PERCENTS)]
            r = RATES[(si + 2 * fi + ei) % len(RATES)]
            tau = TILTS[(si + fi + 2 * ei) % len(TILTS)]
            if hr <= hs:
                continue
            g = float(itu838.rain_specific_attenuation(r, f, el, tau).value)
            a = float(itu618.rain_attenuation(lat, lon, f, el, hs=hs, p=p, R001=r, tau=tau).value)
            w.writerow([f, r, el, tau, lat, repr(hr), hs, p, repr(g), repr(a)])
            i += 1

# P.838-3 alone, across its whole 1-1000 GHz range.
for f in [1.0, 1.5, 2.4, 5.8, 8.0, 10.0, 15.0, 25.0, 38.0, 60.0, 80.0, 100.0,
          150.0, 200.0, 300.0, 500.0, 700.0, 1000.0]:
    for el, tau, r in [(0.0, 0.0, 25.0), (0.0, 90.0, 25.0), (40.0, 45.0, 60.0), (70.0, 20.0, 5.0)]:
        g = float(itu838.rain_specific_attenuation(r, f, el, tau).value)
        w.writerow([f, r, el, tau, "", "", "", "", repr(g), ""])

#!/usr/bin/python3
"""Reference Earth ephemeris for lens/ephemeris_test.go.

Run with Debian's python3 and python3-erfa (pyerfa 2.0.0.1, ERFA 2.0.0)
from this directory:
    /usr/bin/python3 gen.py
It writes two files in testdata/ephemeris/:

  earth_erfa.csv        201 epochs over 2000-01-01 .. 2040-12-31 (step 74.6 d,
                        so the epochs drift through the year);
  earth_erfa_2026.csv   daily 0h epochs through 2026 (365 rows), for the
                        parallax offsets over event-length windows.

Each row holds the Earth's heliocentric position (AU) and velocity (AU/day)
in ICRS-aligned axes from erfa.epv00 (ERFA's simplified series fitted to JPL
DE405; its documentation quotes position errors of order 10 km, ~1e-7 AU,
over 1900-2100 -- from memory). The argument is the TDB Julian date; the Go
side passes the same number as its time argument (TT, TDB and UTC differ by
~70 s, i.e. ~1e-5 AU of Earth motion).
"""
import os

import erfa

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "..", "..", "ephemeris")


def write(name, epochs):
    with open(os.path.join(OUT, name), "w") as f:
        f.write("# Earth heliocentric position (AU) and velocity (AU/day), ICRS axes\n")
        f.write("# source: pyerfa %s (ERFA %s) epv00, argument = TDB Julian date;"
                " generator testdata/gen/ephemeris/gen.py\n"
                % (erfa.__version__, erfa.version.erfa_version))
        f.write("jd_tdb,x,y,z,vx,vy,vz\n")
        for jd in epochs:
            pvh, _ = erfa.epv00(2400000.5, jd - 2400000.5)
            p, v = pvh[0], pvh[1]
            f.write("%.6f,%.12f,%.12f,%.12f,%.14e,%.14e,%.14e\n"
                    % (jd, p[0], p[1], p[2], v[0], v[1], v[2]))


jd0 = 2451544.5  # 2000-01-01 0h
jd1 = 2466154.5  # 2040-12-31 0h
n = 201
write("earth_erfa.csv", [jd0 + i * (jd1 - jd0) / (n - 1) for i in range(n)])
write("earth_erfa_2026.csv", [2461041.5 + i for i in range(365)])  # 2026-01-01 0h on

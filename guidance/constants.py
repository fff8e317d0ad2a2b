"""Physical constants guidance uses (its own, independent of the truth world's).

Values: EGM-96/EIGEN-class Earth gravitational parameter, equatorial radius and unnormalised J2
(common practice, as tabulated in Vallado, Fundamentals of Astrodynamics and Applications, 4th ed.,
2013, appendix D [memory for the appendix]).
"""

MU_EARTH_M3PS2 = 3.986004415e14
R_EARTH_M = 6378136.3
J2 = 1.082626683e-3
OMEGA_EARTH_RADPS = 7.292115e-5
SECONDS_PER_DAY = 86400.0

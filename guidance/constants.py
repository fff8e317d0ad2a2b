"""Physical constants guidance uses (its own, independent of the truth world's).

Values: EGM-96/EIGEN-class Earth gravitational parameter, equatorial radius and unnormalised J2
(common practice, as tabulated in Vallado, Fundamentals of Astrodynamics and Applications, 4th ed.,
2013, appendix D [memory for the appendix]).

Zonal coefficients use the convention U = (mu/r) [1 - sum_n J_n (Re/r)^n P_n(sin phi)], so
J_n = -C_n0 (unnormalised): J2 = +1.0826e-3 and J3 = -2.5327e-6 (Vallado appendix D lists
J3 = -0.0000025327 [memory]; the EIGEN-6S field Orekit ships has C30 = +2.53263e-6).
"""

MU_EARTH_M3PS2 = 3.986004415e14
R_EARTH_M = 6378136.3
J2 = 1.082626683e-3
J3 = -2.53265649e-6
OMEGA_EARTH_RADPS = 7.292115e-5
SECONDS_PER_DAY = 86400.0

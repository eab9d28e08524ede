"""The two-line band the check's tests share: CO J=7-6 and [CI] 3P2-3P1 at z = 2 in one 2 GHz band."""

# Rest frequencies from the CDMS catalogue (Mueller et al. 2005), as in the
# bundled catalog: CO J=7-6 806.651806 GHz and [CI] 3P2-3P1 809.34197 GHz, the
# pair that falls in one 2 GHz band at high redshift (common practice).
CO76 = 806.651806e9
CI21 = 809.34197e9
Z = 2.0
# A 2 GHz band of 8 MHz channels holding both lines at z = 2.
CRVAL3 = 270.3e9
CDELT3 = -8.0e6
NCHAN = 250

"""Constants of robust scale estimation, defined once.

For a normal distribution the upper quartile is ``Phi^-1(3/4) = 0.67449 sd``,
so the median absolute deviation (MAD) estimates ``0.67449 sd`` and the
interquartile range ``1.34898 sd`` (Rousseeuw, P. J. and Croux, C. 1993,
"Alternatives to the median absolute deviation", JASA 88, 1273-1283).

The screen uses the exact values. The exploratory summary and the strip
statistic use the rounded factors as usually quoted (``IQR / 1.349`` and
``1.4826 x MAD``, Hoaglin, Mosteller and Tukey 1983); the strip statistic's
shipped null table was simulated with 1.349, so that factor stays rounded.

Examples
--------
>>> round(MAD_TO_SD * NORMAL_Q75, 12)
1.0
"""

__all__ = ["NORMAL_Q75", "MAD_TO_SD", "SIGMA_FROM_IQR", "SIGMA_FROM_MAD"]

#: Upper quartile of the standard normal, ``scipy.stats.norm.ppf(0.75)``.
NORMAL_Q75 = 0.6744897501960817
#: ``1 / NORMAL_Q75``: a MAD times this estimates the sd of normal values.
MAD_TO_SD = 1.482602218505602
#: IQR of the standard normal as usually quoted (2 x 0.6745, rounded).
SIGMA_FROM_IQR = 1.349
#: ``1 / 0.6745`` as usually quoted.
SIGMA_FROM_MAD = 1.4826

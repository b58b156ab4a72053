"""Published values the tests compare the implementation with, written here from their sources.

These are typed in from the publications, not read from the packages the code itself reads (the code takes its GWP
factors from `globalwarmingpotentials`), so a test that uses them checks the code against the source.
"""

from __future__ import annotations

# IPCC GWP100, CO2 = 1, per gas and assessment report. The SF6 values are from memory (not found in a source during
# this work); globalwarmingpotentials 0.13.2 holds the same numbers.
GWP100: dict[str, dict[str, float]] = {
    # IPCC AR6 WGI (2021) Ch. 7 Table 7.SM.7: CH4 27.9 (one value, no fossil/non-fossil split), N2O 273;
    # SF6 25200 (from memory).
    "AR6GWP100": {"CH4": 27.9, "N2O": 273.0, "SF6": 25200.0},
    # IPCC AR5 WGI (2013) Ch. 8 Table 8.7, without climate-carbon feedback: CH4 28, N2O 265; SF6 23500 (from memory).
    "AR5GWP100": {"CH4": 28.0, "N2O": 265.0, "SF6": 23500.0},
    # IPCC AR4 WGI (2007) Ch. 2 Table 2.14: CH4 25, N2O 298; SF6 22800 (from memory).
    "AR4GWP100": {"CH4": 25.0, "N2O": 298.0, "SF6": 22800.0},
    # IPCC SAR (1995), the values of the first Kyoto commitment period: CH4 21, N2O 310; SF6 23900 (from memory).
    "SARGWP100": {"CH4": 21.0, "N2O": 310.0, "SF6": 23900.0},
}

# IPCC AR6 WGI Ch. 7 Table 7.15 gives CH4 by origin: fossil 29.8, non-fossil 27.0 (as restated in the GHG Protocol's
# AR6 table, 2024). Milepost's contracts carry one CH4 factor, the Table 7.SM.7 value, which lies between them.
AR6_CH4_FOSSIL = 29.8
AR6_CH4_NON_FOSSIL = 27.0

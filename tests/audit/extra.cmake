# Live cross-check of the Kolmogorov-Smirnov test against scipy (Debian python3-scipy,
# run with /usr/bin/python3): a small program prints our p-values on a grid of (n, d)
# and our statistic and p-value for samples drawn by kindling; check_kolmogorov.py
# recomputes them with scipy.stats.kstwo, scipy.stats.kstwobign and scipy.stats.kstest.
kindling_reference_check(
  AREA audit PROGRAM kindling_audit_ks_print
  SOURCE reference/print_kolmogorov.cpp SCRIPT check_kolmogorov.py
  NAME "audit: Kolmogorov-Smirnov statistics and p-values match scipy kstwo, kstwobign and kstest")

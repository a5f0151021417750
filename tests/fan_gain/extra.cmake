# Reference checks of fan_gain against numpy and scipy (Debian python3-numpy,
# python3-scipy run with /usr/bin/python3): a tiny program prints our Gauss-Hermite
# rules and computed gains, and tests/fan_gain/check_rules.py compares them with
# numpy.polynomial.hermite_e.hermegauss and scipy.integrate.quad.
kindling_reference_check(
  AREA fan_gain PROGRAM kindling_fan_gain_print
  SOURCE reference/print_rules.cpp SCRIPT check_rules.py
  NAME "fan_gain: Gauss-Hermite rules match numpy hermegauss and gains match scipy quad")

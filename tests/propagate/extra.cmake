# Critical points of tanh networks checked live against scipy (Debian python3-scipy,
# /usr/bin/python3): a tiny program prints kindling's critical sigma_w^2 and q* for
# several sigma_b^2, and tests/propagate/check_critical.py recomputes them with
# scipy.integrate.quad and scipy.optimize.brentq.
kindling_reference_check(
  AREA propagate PROGRAM kindling_propagate_print
  SOURCE reference/print_critical.cpp SCRIPT check_critical.py
  NAME "propagate: tanh critical points match scipy quad and brentq")

# Cross-check of the math under the sample transforms against scipy.stats and numpy
# (Debian python3-scipy, python3-numpy, run with /usr/bin/python3): a small program prints
# kindling's values, tests/detail/scipy_reference.py compares them.
kindling_reference_check(
  AREA detail PROGRAM kindling_dmath_reference
  SOURCE reference/print_transforms.cpp SCRIPT scipy_reference.py
  NAME "detail: scipy reference (norm.cdf, norm.ppf, truncnorm.std, kstest, numpy float16)")
# Gauss-Hermite rules and the gains computed with them (gain.hpp) against numpy and scipy
# (Debian python3-numpy, python3-scipy): a tiny program prints them, and
# tests/detail/check_rules.py compares them with numpy.polynomial.hermite_e.hermegauss and
# scipy.integrate.quad.
kindling_reference_check(
  AREA detail PROGRAM kindling_gauss_hermite_print
  SOURCE reference/print_rules.cpp SCRIPT check_rules.py
  NAME "detail: Gauss-Hermite rules match numpy hermegauss and gains match scipy quad")

# Cross-check of the sample transforms against scipy.stats and numpy (Debian
# python3-scipy, python3-numpy, run with /usr/bin/python3): a small program prints
# kindling's values, tests/sample/scipy_reference.py compares them.
kindling_reference_check(
  AREA sample PROGRAM kindling_sample_reference
  SOURCE reference/print_transforms.cpp SCRIPT scipy_reference.py
  NAME "sample: scipy reference (norm.cdf, norm.ppf, truncnorm.std, kstest, numpy float16)")

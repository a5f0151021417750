"""What the NumPy checks of the propagation printers share (check_attention.py,
check_convolution.py, check_recurrent.py): running a printer of reference/ on a fresh
directory and reading what it printed, and printing each comparison's line.

Imported from beside those scripts: python puts a script's own folder first on its path,
so ctest's `/usr/bin/python3 tests/propagate/check_*.py PRINTER` finds this module.
"""
import contextlib
import json
import subprocess
import sys
import tempfile


@contextlib.contextmanager
def exported_draw(printer):
    """Runs `printer DIRECTORY` (a program of reference/, which writes its drawn arrays
    there as .npy files) in a temporary directory; gives that directory and the JSON list
    the printer wrote on stdout, the directory kept until the `with` block ends.  A
    printer that fails raises subprocess.CalledProcessError, which fails the check."""
    with tempfile.TemporaryDirectory() as directory:
        out = subprocess.run([printer, directory], check=True, capture_output=True, text=True).stdout
        yield directory, json.loads(out)


def within(what, value, limit):
    """Prints one check's line, `what` then the value against its limit, and says whether
    value <= limit (the caller counts the failures)."""
    ok = value <= limit
    print(f"{what} {value:.2e} {'ok' if ok else f'FAILS (expected <= {limit:g})'}")
    return ok


def check_each(check):
    """Runs the printer named by the command line's first argument and calls
    check(directory, item) for each item it printed, which returns its number of failed
    comparisons; exits 1 if there was any, or if the printer printed nothing to check,
    0 otherwise."""
    with exported_draw(sys.argv[1]) as (directory, items):
        failures = sum(check(directory, item) for item in items)
    if not items:
        print("FAILS: the printer exported nothing to check")
    sys.exit(1 if failures or not items else 0)

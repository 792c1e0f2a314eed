"""Shared by the reference checks (tests/reference/*_reference.py): the pass/fail tally.

Each check prints one line, PASS or FAIL; a script ends with the line `N passed, M failed` and a
non-zero exit when anything failed.
"""

import sys


class Checks:
    def __init__(self):
        self.passed = 0
        self.failed = 0
        self.worst = {}  # reference name -> (largest relative deviation, where)

    def check(self, name, ok, detail=""):
        if ok:
            self.passed += 1
            print(f"PASS {name}" + (f" ({detail})" if detail else ""))
        else:
            self.failed += 1
            print(f"FAIL {name}" + (f": {detail}" if detail else ""))
        sys.stdout.flush()
        return ok

    def deviation(self, reference, value, where):
        """Records the largest relative deviation seen against `reference`."""
        if reference not in self.worst or value > self.worst[reference][0]:
            self.worst[reference] = (value, where)

"""Shared by the reference checks (tests/reference/*_reference.py): the pass/fail/skip tally.

Each check prints one line, PASS, FAIL or SKIP; a script ends with the line
`N passed, M failed, K skipped` and exits 1 when anything failed, SKIPPED (77, which ctest reports
as skipped through the SKIP_RETURN_CODE property) when some part could not run (a dataset file,
chromium or a parser missing) and nothing failed, and 0 otherwise. Under CI=true a part that
cannot run is a failure instead (scripts/install-deps.sh installs everything).
"""

import os
import sys

IN_CI = os.environ.get("CI", "").lower() == "true"
SKIPPED = 77  # the tests' SKIP_RETURN_CODE (tests/CMakeLists.txt)


class Checks:
    def __init__(self):
        self.passed = 0
        self.failed = 0
        self.skipped = 0
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

    def skip(self, name, why):
        """A part that cannot run here: a failure under CI=true, else reported as skipped."""
        if IN_CI:
            return self.check(f"{name} (CI=true)", False, why)
        self.skipped += 1
        print(f"SKIP {name}: {why} (a failure under CI=true)")
        sys.stdout.flush()
        return False

    def summary(self, extra=""):
        print(f"{self.passed} passed, {self.failed} failed, {self.skipped} skipped" + extra)

    def exit_code(self):
        if self.failed:
            return 1
        return SKIPPED if self.skipped else 0

"""Shared helpers for the command-line tests (tests/test_*.py import this module; it is not a
test itself): counted checks, running the CLI, the closing line and exit code."""
import os
import subprocess

CLI = os.environ.get("SE_CLI")
SRC = os.environ.get("SE_SOURCE_DIR", os.path.join(os.path.dirname(__file__), ".."))


class Checks:
    """Counts checks; each failure prints one line starting with FAIL."""

    def __init__(self, name):
        self.name = name
        self.failures = 0
        self.count = 0

    def __call__(self, cond, what):
        self.count += 1
        if not cond:
            self.failures += 1
            print("FAIL %s" % what)
        return cond

    def done(self):
        """Print the closing line and return the exit code (0 all passed, 1 some failed)."""
        print("%s: %d of %d checks failed" % (self.name, self.failures, self.count) if self.failures
              else "%s: all %d checks passed" % (self.name, self.count))
        return 1 if self.failures else 0


def have_cli():
    return bool(CLI) and os.access(CLI, os.X_OK)


def run(args, cwd, timeout=120):
    """Run the CLI with args in cwd: (exit code, standard output, standard error) as text."""
    p = subprocess.run([CLI, *args], cwd=cwd, capture_output=True, text=True, timeout=timeout)
    return p.returncode, p.stdout, p.stderr

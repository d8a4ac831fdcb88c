"""What every reference check shares: the build folder, one printed line
per check, and the exit status (non-zero when any check failed)."""
import os

BUILD = os.environ.get("STATION_BUILD", "build")
_failures = [0]


def tool(name):
    """A helper program built from tests/tools/NAME.c."""
    return os.path.join(BUILD, "tests", "tools", name)


def check(name, ok, detail=""):
    print(("ok   " if ok else "FAIL ") + name + ("" if ok or detail == "" else ": " + str(detail)))
    if not ok:
        _failures[0] += 1


def failures():
    return _failures[0]


def status():
    return 1 if _failures[0] else 0

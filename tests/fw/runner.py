# Runs firmware unit tests under the MicroPython unix port:
#   micropython runner.py MODULE [TEST]
# prints "PASS name" / "FAIL name: error" per test, exits 1 on any failure.
import sys


def main():
    mod = __import__(sys.argv[1])
    names = [sys.argv[2]] if len(sys.argv) > 2 else sorted(
        n for n in dir(mod) if n.startswith("test_"))
    failed = 0
    for n in names:
        try:
            getattr(mod, n)()
            print("PASS", n)
        except Exception as e:
            failed += 1
            print("FAIL", n + ":", repr(e))
            sys.print_exception(e)
    sys.exit(1 if failed else 0)


main()

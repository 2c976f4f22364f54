"""Regenerate every fixture in test-fixtures/ops and test-fixtures/arch.

    /usr/bin/python3 test-fixtures/gen/make_all.py          # everything
    /usr/bin/python3 test-fixtures/gen/make_all.py ops      # only per-op cases
    /usr/bin/python3 test-fixtures/gen/make_all.py arch [family ...]

Then, to check the models with onnxruntime-node (the engine's runtime):
    node test-fixtures/gen/check_with_ort.mjs
"""
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))


def main(argv):
    what = argv[0] if argv else "all"
    if what in ("all", "ops"):
        import make_ops
        make_ops.main()
    if what in ("all", "arch"):
        import make_arch
        make_arch.main(argv[1:] if what == "arch" else [])


if __name__ == "__main__":
    main(sys.argv[1:])

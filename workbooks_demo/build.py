"""Build the demo workbooks into this folder: `python workbooks_demo/build.py`.

Every number in them is invented by unbend's own seeded script (see
`unbend.demo_data`); the committed .xlsx files and their macro-enabled .xlsm
copies (with the standalone VBA module of the xlwings installed where this
runs) are this script's output, and a test rebuilds them and compares cell
contents.
"""
import os
import sys

from unbend.udfs.demo import build_demo_workbooks


def main(folder=None) -> int:
    folder = folder or os.path.dirname(os.path.abspath(__file__))
    for path in build_demo_workbooks(folder):
        print(os.path.relpath(path))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1] if len(sys.argv) > 1 else None))

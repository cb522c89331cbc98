"""Regenerate the dome demo (drawing and model file) in this folder.

Run:  python examples/dome/generate.py
The scenario is invented; see spaceframe/demos.py for what it contains.
"""

from pathlib import Path

from spaceframe.demos import write_demo

if __name__ == "__main__":
    for path in write_demo(Path(__file__).parent, "dome", force=True):
        print(path)

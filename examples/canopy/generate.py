"""Regenerate the canopy demo (drawing and model file) in this folder.

Run:  python examples/canopy/generate.py
The scenario is invented; see spaceframe/demos.py for what it contains.
"""

from pathlib import Path

from spaceframe.demos import write_demo

if __name__ == "__main__":
    for path in write_demo(Path(__file__).parent, "canopy", force=True):
        print(path)

"""Render the demo scenario's sample scans into this folder, with the demo's settings files.

Run from the repository root:  python samples/make_samples.py
The scenario (Wrenfield Cycle Restorations, invented) and its exact part outlines live in
scanmass/cli/demo.py, its settings (demo.toml, the assembly) in scanmass/cli/data/; rendering
uses scanmass.testing (exact pixel coverage, blur, noise, sRGB).
"""

from pathlib import Path

from scanmass.cli.demo import make_samples

if __name__ == "__main__":
    for path in make_samples(Path(__file__).resolve().parent):
        print(f"wrote {path} ({path.stat().st_size // 1024} KiB)")

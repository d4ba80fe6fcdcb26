"""Regenerate the demo's input files in this folder (fixed seed, so the same bytes).

The scenario, the true parameters and the noise model are defined in
kinfit/demo.py; `kinfit demo` writes the same files into its output folder.

    python demo/make_demo_data.py
"""

from pathlib import Path

from kinfit.app.demo import write_inputs

if __name__ == "__main__":
    for path in write_inputs(Path(__file__).parent).values():
        print(f"wrote {path}")

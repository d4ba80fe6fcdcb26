"""Regenerate the demo's input files in this folder (fixed seed, so the same bytes).

The scenario, the true parameters and the noise model are defined in
kinfit.app.demo; `kinfit demo` writes the same files into its output folder.
In the repository this folder is kinfit/app/templates/demo (the copy the package
ships); in a folder made by `kinfit templates` it is demo/.

    python demo/make_demo_data.py
"""

from pathlib import Path

from kinfit.app.demo import write_inputs

if __name__ == "__main__":
    for path in write_inputs(Path(__file__).parent).values():
        print(f"wrote {path}")

"""Regenerate the demo's spectrometer part in this folder (fixed seed, so the same bytes).

The invented scenario, the true values and the noise are defined in
kinfit.app.demo_spectra; `kinfit demo` writes the same files into its output
folder (inputs/spectrometer) and fits them. Run from anywhere:

    python demo/spectra/make_data.py
"""

from pathlib import Path

from kinfit.app.demo_spectra import write_inputs

if __name__ == "__main__":
    for path in write_inputs(Path(__file__).resolve().parent).values():
        print(f"wrote {path}")

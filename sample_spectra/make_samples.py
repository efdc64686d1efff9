"""Write the bundled sample spectra reproducibly (fixed seeds).

    python sample_spectra/make_samples.py

writes every sample and its ground truth into sample_spectra/ and the same
files into linefinder/data/samples/ (what an installed linefinder ships).
"""

from pathlib import Path

from linefinder.samples import write_samples

HERE = Path(__file__).resolve().parent

if __name__ == "__main__":
    for folder in (HERE, HERE.parent / "linefinder" / "data" / "samples"):
        for path in write_samples(folder):
            print(f"wrote {path} ({path.stat().st_size / 1024:.0f} KiB)")

"""Write the bundled sample spectra reproducibly (fixed seeds).

    python sample_spectra/make_samples.py

writes every sample and its ground truth into linefinder/data/samples/, the
one copy that an installed linefinder ships (`linefinder.simulate.scenarios`
says what each scenario is).
"""

from pathlib import Path

from linefinder.simulate.scenarios import write_samples

PACKAGE_SAMPLES = Path(__file__).resolve().parent.parent / "linefinder" / "data" / "samples"

if __name__ == "__main__":
    for path in write_samples(PACKAGE_SAMPLES):
        print(f"wrote {path} ({path.stat().st_size / 1024:.0f} KiB)")

"""The public verbs accept a file path, a specutils Spectrum and arrays with units alike."""

import numpy as np
import pytest
from astropy import units as u

import linefinder as lf
from linefinder.errors import LinefinderError, SpectrumFormatError
from linefinder.simulate.scenarios import sample_path


@pytest.fixture(scope="module")
def galaxy():
    return lf.read_spectrum(sample_path("emission_galaxy.fits"))


def _key(result):
    return result.status, round(float(result.z), 8), sorted(
        str(x) for x in result.features["label"] if str(x))


def test_path_specutils_and_arrays_give_one_answer(galaxy):
    # the bundled sample is an invented scenario; the check is that the three forms agree
    from_path = lf.identify(sample_path("emission_galaxy.fits"))
    from_specutils = lf.identify(galaxy.to_specutils(), medium=galaxy.medium)
    # arrays carry no header: the resolving power the file states is given as an option
    from_arrays = lf.identify(galaxy.axis, galaxy.flux, galaxy.uncertainty, medium=galaxy.medium,
                              resolution=galaxy.meta["resolution"])
    assert from_path.status == "secure"
    assert _key(from_path) == _key(from_specutils) == _key(from_arrays)


def test_find_features_takes_arrays(galaxy):
    res = lf.find_features(galaxy.axis, galaxy.flux, galaxy.uncertainty)
    assert len(res.features) > 3


def test_a_string_that_is_not_a_file_gets_the_package_error(tmp_path):
    with pytest.raises(SpectrumFormatError, match="no such file"):
        lf.identify(str(tmp_path / "missing.fits"))


def test_an_axis_that_is_not_spectral_is_refused():
    with pytest.raises(LinefinderError, match="not a wavelength"):
        lf.identify(np.arange(10.0) * u.kg, np.ones(10) * u.Jy)


def test_public_names():
    for name in ("identify", "find_features", "read_spectrum", "build_catalogue", "level_table",
                 "write_report", "Identification", "FeatureResult", "SpectrumData", "__version__"):
        assert hasattr(lf, name), name

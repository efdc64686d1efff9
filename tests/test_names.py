"""Series and line names as spectroscopists write them (common practice of the trade:
Balmer lines as Hα..Hε then H8, H9 ...; Paβ, Brγ; radio recombination lines as H109α;
ion lines by their wavelength in Å, He II 4686 in air)."""

import numpy as np
import pytest

from linefinder.catalogue.build import build_catalogue
from linefinder.catalogue.names import line_label, line_labels, series_name
from linefinder.physics.species import parse_species


@pytest.mark.parametrize("species, nl, nu, name", [
    ("H", 2, 3, "Hα"), ("H", 2, 7, "Hε"), ("H", 2, 8, "H8"), ("H", 1, 2, "Lyα"),
    ("H", 3, 5, "Paβ"), ("H", 4, 7, "Brγ"), ("H", 109, 110, "H109α"), ("H", 110, 112, "H110β"),
    ("D", 2, 3, "Dα"), ("He", 109, 110, "He109α"), ("Fe XXVI", 1, 2, "Fe XXVI Lyα"),
])
def test_names_of_the_trade(species, nl, nu, name):
    t = build_catalogue(species, nl, nu)
    assert t["label"][0] == name


def test_series_names():
    assert [series_name(n) for n in range(1, 8)] == ["Lyman", "Balmer", "Paschen", "Brackett",
                                                     "Pfund", "Humphreys", "series 7"]


@pytest.mark.parametrize("species", ["H", "D", "T", "He II", "He", "C", "Fe XXVI", "U XCII"])
def test_vectorised_labels_equal_one_by_one(species):
    # every branch of the array version (radio, Greek, upper level, wavelength, no wavelength)
    sp = parse_species(species)
    nl, nu = np.meshgrid(np.arange(1, 12), np.arange(2, 140))
    keep = nu > nl
    nl, nu = nl[keep], nu[keep]
    conv = np.linspace(100.0, 4e7, len(nl))
    conv[::17] = np.nan
    fast = line_labels(sp, nl, nu, conv)
    slow = [line_label(sp, a, b, c) for a, b, c in zip(nl, nu, conv)]
    assert list(fast) == slow

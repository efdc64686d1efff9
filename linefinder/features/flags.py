"""Flags of a feature, and the one way to read them.

A feature's ``flags`` column holds its flags joined by commas (``"blend,edge"``);
`has_flag` splits them and compares whole names, never substrings.
"""

from enum import Enum

__all__ = ["Flag", "has_flag", "join_flags", "FLAG_MEANINGS"]


class Flag(str, Enum):
    BLEND = "blend"            #: fitted jointly with a neighbour within 1.5 FWHM
    EDGE = "edge"              #: at the end of a valid stretch of the spectrum
    MASKED = "masked"          #: a masked pixel lies within the line
    POOR_FIT = "poor_fit"      #: the last group fit was unusable; the last converged fit is kept
    UNRESOLVED = "unresolved"  #: narrower than the instrument allows: measured as a point source
    SKY = "sky"                #: on a night-sky emission line
    TELLURIC = "telluric"      #: inside a telluric absorption band
    AT_Z = "at_z"              #: not detected by the search; measured where the redshift puts a line

    def __str__(self):
        return self.value


FLAG_MEANINGS = {f.value: f.__doc__ for f in Flag}


def has_flag(flags, flag):
    """True when the comma-joined `flags` text holds `flag` (a `Flag` or its name)."""
    return str(Flag(flag)) in str(flags).split(",")


def join_flags(*flags):
    """Comma-joined text of the non-empty flags, each once, in the order given."""
    out = []
    for f in flags:
        for part in str(f).split(","):
            if part and part not in out:
                out.append(part)
    return ",".join(out)

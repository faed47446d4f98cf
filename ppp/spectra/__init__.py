"""Spectra a chemist can lay beside a measurement.

* :mod:`.lineshapes` - broadening of stick spectra into molar absorptivity (f-eps relation), vibronic
  progressions;
* :mod:`.measured` - measured spectra from CSV or JCAMP-DX;
* :mod:`.fitting` - least-squares fit of shift, scale and width; similarity scores;
* :mod:`.perceived` - colour of a solution (CIE 1931 2 deg, D65, via colour-science);
* :mod:`.density` - transition and difference densities, orbital classification;
* :mod:`.sources` - sticks and orbitals from ``ppp.compute``, a record file, or plain arrays;
* :mod:`.plots`, :mod:`.drawing` - figures (matplotlib) and structure pictures (RDKit), imported on use.
"""
from .lineshapes import Curve, LineShape, Progression, Sticks, simulate  # noqa: F401
from .sources import SpectrumSource, from_arrays, from_record, from_result  # noqa: F401

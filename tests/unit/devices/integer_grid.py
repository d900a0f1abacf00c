"""Two third-party 16QAM libraries as they ship: komm and scikit-commpy, both on the integer grid
(points at +-1, +-3 on each axis, mean energy 10, not the unit energy of the published tables).

Each class only forwards the harness's calls to the library's own functions: no scaling, no
relabelling, no sign change. The soft outputs are the libraries' own:

- komm 0.37: ``Constellation.posteriors(received, noise_power)`` then
  ``Labeling.marginalize(posteriors)``, which returns ``L = log Pr[b=0] / Pr[b=1]`` (komm's
  ``Labeling.marginalize`` docstring): a positive L-value means bit 0;
- scikit-commpy 0.8: ``Modem.demodulate(symbols, 'soft', noise_var)``, which returns
  ``log(sum over points with the bit 1 / sum over points with the bit 0)`` of
  ``exp(-|y - x|^2 / noise_var)`` (commpy/modulation.py, ``Modem.demodulate``): a positive LLR
  means bit 1.

Both read the noise variance as the complex variance per sample (komm's docstring: "circularly
symmetric complex Gaussian, with the noise power equally divided between the real and
imaginary parts"; commpy's exponent ``|y - x|^2 / noise_var``), which is what the harness
passes.
"""

import numpy as np

try:  # test extras: the tests that use these devices skip without them
    import commpy.modulation as commpy_modulation
    import komm
except ImportError:  # pragma: no cover
    commpy_modulation = komm = None


class Komm16qam:
    """``komm.QAMConstellation(16)`` with ``komm.ReflectedRectangularLabeling((2, 2))``."""

    def __init__(self):
        self.constellation = komm.QAMConstellation(16)
        self.labeling = komm.ReflectedRectangularLabeling((2, 2))

    def modulate(self, bits):
        return self.constellation.indices_to_symbols(
            self.labeling.bits_to_indices(np.asarray(bits, dtype=int)))

    def demodulate(self, samples):
        return self.labeling.indices_to_bits(self.constellation.closest_indices(samples))

    def demodulate_soft(self, samples, noise_var):
        return self.labeling.marginalize(self.constellation.posteriors(samples, noise_var))


class Commpy16qam:
    """``commpy.modulation.QAMModem(16)``."""

    def __init__(self):
        self.modem = commpy_modulation.QAMModem(16)

    def modulate(self, bits):
        return self.modem.modulate(np.asarray(bits, dtype=int))

    def demodulate(self, samples):
        return self.modem.demodulate(samples, "hard")

    def demodulate_soft(self, samples, noise_var):
        return self.modem.demodulate(samples, "soft", noise_var)

"""Vector sources and channels: what goes into a device under test, and what happens on the way.

- :mod:`~modemverify.vectors.prbs`: ITU-T O.150 PRBS patterns (and the common PRBS7);
- :mod:`~modemverify.vectors.coverage`: every label, and de Bruijn sequences (every transition);
- :mod:`~modemverify.vectors.strategies`: hypothesis strategies for bit and label sequences;
- :mod:`~modemverify.vectors.channels`: calibrated AWGN and deterministic impairments;
- :mod:`~modemverify.vectors.recording`: vector sets on disk (imported from the module itself, so
  that reading vectors does not load the file-format code).

The package re-exports the public names of the first four submodules, except the PRBS generator
function :func:`modemverify.vectors.prbs.prbs`: bound here it would hide the submodule of the same
name, so ``modemverify.vectors.prbs`` always names the submodule. Import the function with
``from modemverify.vectors.prbs import prbs``.
"""

from modemverify.vectors.channels import (
    CHANNEL_KINDS,
    Awgn,
    Channel,
    DcOffset,
    FrequencyOffset,
    IqImbalance,
    PhaseOffset,
    Quantise,
    channel_from_config,
)
from modemverify.vectors.coverage import (
    MAX_BITS_PER_SYMBOL,
    MAX_DE_BRUIJN_LENGTH,
    de_bruijn,
    de_bruijn_bits,
    de_bruijn_labels,
    exhaustive_bits,
    exhaustive_labels,
)
from modemverify.vectors.prbs import PRBS_PATTERNS, PrbsSpec, PrbsStream, prbs_spec
from modemverify.vectors.strategies import bit_sequences, label_sequences

__all__ = [
    # channels
    "Awgn", "PhaseOffset", "FrequencyOffset", "IqImbalance", "DcOffset", "Quantise", "Channel",
    "CHANNEL_KINDS", "channel_from_config",
    # coverage
    "MAX_BITS_PER_SYMBOL", "MAX_DE_BRUIJN_LENGTH", "exhaustive_labels", "exhaustive_bits",
    "de_bruijn", "de_bruijn_labels", "de_bruijn_bits",
    # prbs (the generator function stays in its submodule)
    "PrbsSpec", "PRBS_PATTERNS", "prbs_spec", "PrbsStream",
    # strategies
    "bit_sequences", "label_sequences",
]

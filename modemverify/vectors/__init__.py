"""Vector sources and channels: what goes into a device under test, and what happens on the way.

- :mod:`~modemverify.vectors.prbs`: ITU-T O.150 PRBS patterns (and the common PRBS7);
- :mod:`~modemverify.vectors.coverage`: every label, and de Bruijn sequences (every transition);
- :mod:`~modemverify.vectors.strategies`: hypothesis strategies for bit and label sequences;
- :mod:`~modemverify.vectors.channels`: calibrated AWGN and deterministic impairments.

Note that the function :func:`prbs` shadows the submodule name ``modemverify.vectors.prbs`` as
an attribute; import module-level names with ``from modemverify.vectors.prbs import ...``.
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
from modemverify.vectors.prbs import PRBS_PATTERNS, PrbsSpec, PrbsStream, prbs, prbs_spec
from modemverify.vectors.strategies import bit_sequences, label_sequences

__all__ = [
    # prbs
    "PrbsSpec", "PRBS_PATTERNS", "prbs", "prbs_spec", "PrbsStream",
    # coverage
    "MAX_BITS_PER_SYMBOL", "MAX_DE_BRUIJN_LENGTH", "exhaustive_labels", "exhaustive_bits",
    "de_bruijn", "de_bruijn_labels", "de_bruijn_bits",
    # strategies
    "bit_sequences", "label_sequences",
    # channels
    "Awgn", "PhaseOffset", "FrequencyOffset", "IqImbalance", "DcOffset", "Quantise", "Channel",
    "CHANNEL_KINDS", "channel_from_config",
]

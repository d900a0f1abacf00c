"""Signal processing: pulses, spectra, alignment, EVM and sample formats (numpy and scipy only).

- :mod:`~modemverify.dsp.pulses`: pulse taps, shaping, matched filter, theoretical PSD and
  occupied bandwidth;
- :mod:`~modemverify.dsp.psd`: Welch PSD, occupied and x-dB bandwidths, masks, ACLR;
- :mod:`~modemverify.dsp.align`: delay, gain, phase and frequency offset between two waveforms;
- :mod:`~modemverify.dsp.evm`: EVM and its limits;
- :mod:`~modemverify.dsp.formats`: the one sample codec (float32, Q15, Q7 ...), clipping, SQNR.

Names are imported on first use, so that a device process importing the codec does not load
scipy. ``modemverify.dsp.evm`` is the submodule; its function is ``modemverify.dsp.evm.evm``.
"""

from __future__ import annotations

from .._door import lazy_door

_EXPORTS = {
    "PULSE_SHAPES": "pulses",
    "DEFAULT_SPAN": "pulses",
    "pulse_taps": "pulses",
    "PulseShape": "pulses",
    "welch_psd": "psd",
    "occupied_bandwidth": "psd",
    "x_db_bandwidth": "psd",
    "MaskResult": "psd",
    "mask_level_db": "psd",
    "mask_check": "psd",
    "channel_power": "psd",
    "aclr": "psd",
    "Alignment": "align",
    "estimate_alignment": "align",
    "apply_alignment": "align",
    "DEFAULT_EVM_LIMITS": "evm",
    "EVM_MODULATIONS": "evm",
    "EvmResult": "evm",
    "evm_limit": "evm",
    "snr_db_from_evm": "evm",
    "evm_from_snr_db": "evm",
    "SampleFormat": "formats",
    "SAMPLE_FORMATS": "formats",
    "PYTHON_FORMATS": "formats",
    "WIRE_FORMATS": "formats",
    "parse_format": "formats",
    "check_format": "formats",
    "check_full_scale": "formats",
    "encode_samples": "formats",
    "to_format": "formats",
    "from_format": "formats",
    "clip_count": "formats",
    "sqnr_db": "formats",
    "sample_format_opt": "formats",
    "full_scale_opt": "formats",
}

__all__ = sorted(_EXPORTS)
__getattr__, __dir__ = lazy_door(__name__, _EXPORTS)

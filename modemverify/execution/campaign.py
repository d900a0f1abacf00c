"""The campaign file: a BER campaign's state, kept so that an interrupted run can resume.

``modemverify check DEVICE.yaml --report DIR`` keeps ``DIR/campaign.json`` (or ``--campaign
FILE``): for every device and BER point, either the point's verdict (decided) or its state
after the last block done (the blocks done, the bits and errors, the error counts per
sub-block, whether the sequential test or the interval decides, and the measured
over-dispersion). It is rewritten atomically (a temporary file renamed into place) after a
block whenever half a second has passed since the last write, after every decided point, and
when the run ends or is interrupted; a process killed outright (SIGKILL, power) loses at most
the blocks of that last half second, which a resumed run computes again, identically.

``--resume`` continues from it: decided points are taken as they are, a point in progress
continues at its next block (the blocks have their own random streams, so the verdict is that
of an uninterrupted run), and the checks other than ``ber`` run again (they are short and
deterministic). A file written by another modemverify version, for another seed, or for
another content of a device file is refused, saying which.
"""

from __future__ import annotations

import json
import time
from pathlib import Path

from .._version import __version__
from ..blocks import Journal
from ..errors import ConfigError
from ..report.outputs import write_atomic
from ..spec import DeviceSpec

__all__ = ["FORMAT", "CAMPAIGN_FILE", "WRITE_EVERY_S", "CampaignFile"]

FORMAT = "modemverify-campaign/1"
#: the campaign file's name in a report folder
CAMPAIGN_FILE = "campaign.json"
#: the longest a point's state waits for its write (seconds)
WRITE_EVERY_S = 0.5


class CampaignFile(Journal):
    """A :class:`~modemverify.blocks.Journal` kept in a JSON file (see the module docstring).

    ``resume=False`` starts a new campaign (an old file is replaced at the first write);
    ``resume=True`` requires the file and checks that it belongs to this run.
    """

    def __init__(self, path: str | Path, *, seed: int, resume: bool = False):
        self.path = Path(path)
        self.seed = int(seed)
        self._dirty = False
        self._last = 0.0
        self.data = {"format": FORMAT, "modemverify": __version__, "seed": self.seed,
                     "devices": {}}
        if resume:
            self.data = self._read()

    def _read(self) -> dict:
        where = str(self.path)
        try:
            data = json.loads(self.path.read_text(encoding="utf-8"))
        except FileNotFoundError:
            raise ConfigError("--resume: there is no campaign file to resume; run without "
                              "--resume first (with --report or --campaign)", file=where
                              ) from None
        except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise ConfigError(f"--resume: cannot read the campaign file: {exc}", file=where
                              ) from None
        if not isinstance(data, dict) or data.get("format") != FORMAT:
            raise ConfigError(f"not a campaign file (format {data.get('format')!r} where "
                              f"{FORMAT!r} was expected)" if isinstance(data, dict) else
                              "not a campaign file", file=where, key="format")
        if data.get("modemverify") != __version__:
            raise ConfigError(f"written by modemverify {data.get('modemverify')}, and this is "
                              f"{__version__}: its blocks may not be this version's blocks; "
                              f"start the campaign afresh (without --resume)", file=where,
                              key="modemverify")
        if data.get("seed") != self.seed:
            raise ConfigError(f"written for --seed {data.get('seed')}, and this run has --seed "
                              f"{self.seed}; resume with --seed {data.get('seed')}, or start "
                              f"afresh (without --resume)", file=where, key="seed")
        if not isinstance(data.get("devices"), dict):
            raise ConfigError("expected a mapping of devices", file=where, key="devices")
        return data

    def attach(self, spec: DeviceSpec) -> None:
        """Take ``spec`` into the campaign; refuse it when the file has another content of it."""
        devices = self.data["devices"]
        entry = devices.get(spec.name)
        if entry is not None and entry.get("sha256") != spec.sha256:
            raise ConfigError(
                f"the campaign was run on another content of the device file of "
                f"{spec.name!r} (sha256 {str(entry.get('sha256'))[:12]}..., now "
                f"{str(spec.sha256)[:12]}...): its blocks do not belong to this device "
                f"file; start afresh (without --resume)", file=str(self.path),
                key=f"devices.{spec.name}")
        if entry is None:
            devices[spec.name] = {"file": spec.file, "sha256": spec.sha256, "points": {}}

    def _points(self, device: str) -> dict:
        entry = self.data["devices"].setdefault(device, {"file": None, "sha256": None,
                                                         "points": {}})
        return entry["points"]

    def load(self, device, point):
        return self._points(device).get(point)

    def save(self, device, point, state):
        self._points(device)[point] = {"state": state}
        self._dirty = True
        if time.monotonic() - self._last >= WRITE_EVERY_S:
            self.flush()

    def decided(self, device, point, verdict):
        self._points(device)[point] = {"verdict": verdict.to_json()}
        self._dirty = True
        self.flush()

    def flush(self) -> None:
        """Write the file now if anything changed since the last write."""
        if self._dirty:
            write_atomic(self.path, json.dumps(self.data, indent=1, allow_nan=False))
            self._dirty = False
            self._last = time.monotonic()

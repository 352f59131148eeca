"""Audio devices through python-sounddevice (PortAudio), imported lazily.

Everything else in characterize works without PortAudio; only the functions
here (and :mod:`.stream`) need it, and they say how to install it when it is
missing.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

from ..errors import InputError

#: How to get PortAudio, for the messages.
INSTALL_HINT = ("install PortAudio (Debian/Ubuntu: apt-get install libportaudio2; macOS: "
                "brew install portaudio) and python-sounddevice (pip install "
                "'characterize[live]'), or use --device simulate")


def import_sounddevice() -> Any:
    """The sounddevice module, or :class:`InputError` saying how to install it."""
    try:
        import sounddevice as sd
    except ImportError:
        raise InputError("--device", None, "python-sounddevice is not installed: "
                         + INSTALL_HINT) from None
    except OSError:  # sounddevice raises OSError when the PortAudio library is missing
        raise InputError("--device", None, "the PortAudio library was not found: "
                         + INSTALL_HINT) from None
    return sd


@dataclass(frozen=True)
class DeviceInfo:
    """One audio device as PortAudio reports it."""

    index: int
    name: str
    host_api: str
    max_input_channels: int
    max_output_channels: int
    default_rate_hz: float
    default_input: bool = False
    default_output: bool = False

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def list_devices() -> list[DeviceInfo]:
    """Every device PortAudio sees (empty when there are none, e.g. no sound
    server running).

    Raises
    ------
    InputError
        PortAudio or python-sounddevice is missing (with how to install them).
    """
    sd = import_sounddevice()
    apis = [a["name"] for a in sd.query_hostapis()]
    try:
        d_in, d_out = sd.default.device
    except (TypeError, ValueError):
        d_in = d_out = -1
    out = []
    for i, d in enumerate(sd.query_devices()):
        api = apis[d["hostapi"]] if 0 <= d["hostapi"] < len(apis) else str(d["hostapi"])
        out.append(DeviceInfo(index=i, name=str(d["name"]), host_api=str(api),
                              max_input_channels=int(d["max_input_channels"]),
                              max_output_channels=int(d["max_output_channels"]),
                              default_rate_hz=float(d["default_samplerate"]),
                              default_input=i == d_in, default_output=i == d_out))
    return out


def find_device(spec: str | None, *, inputs: int, outputs: int) -> DeviceInfo:
    """The device for ``--device`` (a number from ``characterize devices``, or
    part of a name), checked for enough input and output channels.

    ``None`` is the system's default device.

    Raises
    ------
    InputError
        No such device, more than one name matches, too few channels, no
        devices at all (one line with the fix).
    """
    devices = list_devices()
    if not devices:
        raise InputError("--device", None, "PortAudio sees no audio devices (no sound card, "
                         "or no sound server running): check the interface is connected, "
                         "or use --device simulate")
    if spec is None:
        chosen = [d for d in devices if d.default_input] or \
                 [d for d in devices if d.default_output]
        if not chosen:
            raise InputError("--device", None, "there is no default device: pick one with "
                             "--device N (see characterize devices)")
        dev = chosen[0]
    elif spec.strip().isdigit():
        n = int(spec)
        if not 0 <= n < len(devices):
            raise InputError("--device", None, f"no device number {n} (there are "
                             f"{len(devices)}, 0 to {len(devices) - 1}: see characterize "
                             "devices)")
        dev = devices[n]
    else:
        key = spec.strip().lower()
        exact = [d for d in devices if d.name.lower() == key]
        matches = exact or [d for d in devices if key in d.name.lower()]
        if not matches:
            raise InputError("--device", None, f"no device named like {spec!r}: see "
                             "characterize devices")
        if len(matches) > 1:
            names = ", ".join(f"{d.index} {d.name!r}" for d in matches[:5])
            raise InputError("--device", None, f"{spec!r} matches several devices ({names}): "
                             "give the number")
        dev = matches[0]
    if dev.max_input_channels < inputs:
        raise InputError("--device", None, f"device {dev.index} {dev.name!r} has "
                         f"{dev.max_input_channels} input channel(s) but {inputs} are needed "
                         "(--inside/--outside): use a two-input interface")
    if dev.max_output_channels < outputs:
        raise InputError("--device", None, f"device {dev.index} {dev.name!r} has "
                         f"{dev.max_output_channels} output channel(s) but {outputs} are "
                         "needed (--output)")
    return dev


def check_rate(dev: DeviceInfo, rate_hz: float, inputs: int, outputs: int) -> None:
    """Ask PortAudio whether the device takes this rate and channel count.

    Raises
    ------
    InputError
        The rate (or the channel count) is refused; the message gives the
        device's own rate.
    """
    sd = import_sounddevice()
    try:
        sd.check_input_settings(device=dev.index, channels=inputs, samplerate=rate_hz,
                                dtype="float32")
        sd.check_output_settings(device=dev.index, channels=outputs, samplerate=rate_hz,
                                 dtype="float32")
    except sd.PortAudioError as exc:
        text = str(exc).splitlines()[0] if str(exc) else "refused"
        if "rate" in text.lower():
            raise InputError("--rate", None, f"device {dev.index} {dev.name!r} does not take "
                             f"{rate_hz:g} Hz ({text}): use its own rate, --rate "
                             f"{dev.default_rate_hz:g}") from None
        raise InputError("--device", None, f"device {dev.index} {dev.name!r} refuses these "
                         f"settings ({text}): check it is not in use by another program") \
            from None
    except ValueError as exc:
        raise InputError("--device", None, f"device {dev.index} {dev.name!r}: {exc}") from None

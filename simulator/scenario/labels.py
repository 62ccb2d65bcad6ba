"""Human labels of scenario parameter paths, with their symbols and units.

One table for every figure, report and planner that names a scenario
parameter: a physicist reads "drive detuning Δ/2π (Hz)" or "drive
detuning Δ / Ωm", never the path ``drive.detuning_hz``. Paths not in the
table fall back to a readable form built from the path itself (section and
key in words, unit from the key's suffix), so a new scenario key is never
shown raw.

The symbols follow the usual notation of cavity optomechanics (Aspelmeyer,
Kippenberg & Marquardt, Rev. Mod. Phys. 86, 1391 (2014), Table I): Δ the
detuning, κ the cavity energy decay rate, Ωm and Γm the mechanical frequency
and damping, g0 the single-photon coupling. Angular rates are quoted as
frequencies (the /2π the scenario keys carry).
"""

import dataclasses
import re

# unit of a key from its suffix (the scenario's naming rule: key_<unit>)
SUFFIX_UNITS = {"hz": "Hz", "w": "W", "k": "K", "m": "m", "kg": "kg", "s": "s", "v": "V",
                "rad": "rad", "ohm": "V/A", "per_hz": "1/Hz", "rad2_per_hz": "rad²/Hz",
                "a_per_sqrt_hz": "A/√Hz", "quanta": "quanta", "dbm": "dBm"}


@dataclasses.dataclass(frozen=True)
class Label:
    """Words, symbol and unit of one parameter.

    ``symbol`` names the quantity in a ratio ("Δ / Ωm") and, followed by
    ``/2π`` for a rate in Hz, on an axis of its own; empty when the trade
    has no usual symbol.
    """

    words: str
    symbol: str = ""
    unit: str = ""

    def axis(self):
        """Axis label in the scenario's own unit, e.g. "drive detuning Δ/2π (Hz)"."""
        symbol = self.symbol + ("/2π" if self.symbol and self.unit == "Hz" else "")
        text = f"{self.words} {symbol}".strip()
        return f"{text} ({self.unit})" if self.unit else text

    def ratio(self, other):
        """Axis label of this parameter in units of ``other`` (a :class:`Label`)."""
        mine = f"{self.words} {self.symbol}".strip()
        return f"{mine} / {other.symbol or other.words}"


# section.key (any [[mechanics]] index) -> (words, symbol)
_TABLE = {
    "drive.wavelength_m": ("drive wavelength", "λ"),
    "drive.frequency_hz": ("drive frequency", "ωd"),
    "drive.power_w": ("drive power", "P"),
    "drive.detuning_hz": ("drive detuning", "Δ"),
    "drive.phase_noise.linewidth_hz": ("drive linewidth", ""),
    "drive.intensity_noise.relative_intensity_noise_per_hz": ("drive intensity noise (RIN)",
                                                              ""),
    "drive.calibration_tone.depth_rad": ("calibration-tone depth", "φ0"),
    "drive.calibration_tone.frequency_hz": ("calibration-tone frequency", ""),
    "cavity.linewidth_hz": ("cavity linewidth", "κ"),
    "cavity.external_linewidth_hz": ("cavity external coupling", "κex"),
    "cavity.bath_occupation": ("cavity bath occupation", "nc"),
    "mechanics.frequency_hz": ("mechanical frequency", "Ωm"),
    "mechanics.linewidth_hz": ("mechanical linewidth", "Γm"),
    "mechanics.effective_mass_kg": ("effective mass", "meff"),
    "mechanics.coupling_hz": ("single-photon coupling", "g0"),
    "mechanics.bath_temperature_k": ("bath temperature", "T"),
    "mechanics.bath_occupation": ("bath occupation", "nth"),
    "detection.efficiency": ("detection efficiency", "η"),
    "detection.local_oscillator_power_w": ("local-oscillator power", "PLO"),
    "detection.intermediate_frequency_hz": ("intermediate frequency", "fIF"),
    "detection.quadrature_angle_rad": ("homodyne quadrature angle", "θ"),
    "electronics.amplifier_added_quanta": ("amplifier added noise", "nadd"),
    "electronics.bandwidth_hz": ("electronics bandwidth", ""),
    "digitizer.sample_rate_hz": ("sample rate", "fs"),
    "digitizer.bits": ("digitiser resolution", ""),
    "record.duration_s": ("record duration", "T"),
    "pair.power_w": ("back-action-evading pair's total power", "P"),
    "pair.mean_detuning_hz": ("pair's mean detuning", "Δ̄"),
    "pair.spacing_offset_hz": ("pair's spacing offset", "(ν − Ωm)"),
}
_MODE = re.compile(r"^mechanics\[(\d+)\]\.(.+)$")


def label(path, mode_names=()):
    """The :class:`Label` of scenario parameter ``path`` (e.g. ``"drive.power_w"``).

    ``mechanics[i].key`` names mode ``i``: by its name when ``mode_names``
    holds it, and in the symbol's subscript when more than mode 0 could be
    meant. Unknown paths read as "section key", in words, with the unit of the
    key's suffix.
    """
    path = str(path)
    leaf = path.rsplit(".", 1)[-1]
    unit = SUFFIX_UNITS.get(unit_suffix(leaf)[1:], "")
    match = _MODE.match(path)
    key = f"mechanics.{match.group(2)}" if match else path
    known = _TABLE.get(key)
    if known is None:
        section = path.rpartition(".")[0]
        words = leaf.removesuffix(unit_suffix(leaf)).replace("_", " ").strip()
        where = section.replace("_", " ").replace(".", " ")
        return Label(f"{where} {words}".strip(), "", unit)
    words, symbol = known
    if match:
        index = int(match.group(1))
        name = mode_names[index] if index < len(mode_names) else f"mode {index}"
        words = f"{words} of {name}" if len(mode_names) != 1 else words
        if index and symbol:
            symbol = f"{symbol},{index}"
    return Label(words, symbol, unit)


def unit_suffix(key):
    """The unit suffix of ``key`` with its underscore ("_hz"), or ""."""
    for suffix in sorted(SUFFIX_UNITS, key=len, reverse=True):
        if key.endswith("_" + suffix):
            return "_" + suffix
    return ""


def axis_label(path, unit_path=None, mode_names=()):
    """Axis label of ``path``, in units of parameter ``unit_path`` when given.

    >>> axis_label("drive.detuning_hz", "mechanics[0].frequency_hz")
    'drive detuning Δ / Ωm'
    >>> axis_label("drive.power_w")
    'drive power P (W)'
    """
    mine = label(path, mode_names)
    if unit_path:
        return mine.ratio(label(unit_path, mode_names))
    return mine.axis()

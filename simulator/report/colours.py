"""One colour per noise source, the same in every figure and every scenario.

A noise budget names its terms "source: term" (``simulator.linear.budget``),
e.g. "internal loss bath: back-action motion". The colour follows the source
by name from a fixed table, so the internal-loss bath is drawn in the same
colour in the demo, a microwave case and a sweep; the term sets the line
style (motion solid, imprecision dotted, their cross term dashed; among the
detection chain's terms, the signal lost solid, the sample averaging dashed,
aliasing dotted). The
thermal baths of the mechanical modes take colours in mode order, so the
first mode's bath keeps its colour whatever the mode is called. A source the
table does not know takes a colour from a reserve list chosen by a checksum of
its name: stable from run to run, never one of the named colours.

With several drive tones each tone has its own copy of a source, named
"<source> of tone <tone>" (``simulator.model.laser_noise.tone_source``). The
copies keep the source's colour family and take a shade each, in the order the
tones first appear in the budget: the first tone the source's own colour, the
next ones mixed towards white (a dark colour), towards black (a light one) or
both in turn, so that the copies differ in lightness and stay apart in a
greyscale print too.
"""

import zlib

FLOOR_COLOUR = "0.45"
TOTAL_COLOUR = "black"

# named sources (substring of the source name, first match wins) -> colour
_NAMED = (
    ("shot noise", FLOOR_COLOUR),
    ("external port vacuum", "#1f5fa8"),      # blue
    ("internal loss bath", "#c0392b"),        # red
    ("detection loss vacuum", "#7f8c8d"),     # grey-green
    ("added noise", "#8c564b"),               # brown
    ("electronics", "#34495e"),               # slate
    # navy: apart from the sampling's goldenrod, the peak's orange and the olive tone
    ("intensity noise", "#00008f"),
    ("relaxation-oscillation", "#ff7f0e"),    # orange
    ("phase-noise", "#e377c2"),               # pink
    ("frequency noise", "#ad1457"),           # raspberry
    ("calibration tone", "#bcbd22"),          # olive
    # a back-action-evading pair's residual: far from the internal-loss red it sits beside
    ("counter-rotating back-action", "#cf00ff"),  # electric violet
    # what the detection chain takes away: losses, then the digitiser
    ("detection efficiency", "#7f8c8d"),      # grey-green, as the loss's vacuum
    ("single-ended detection", "#7f8c8d"),
    ("sampling", "#b8860b"),                  # dark goldenrod
)
# thermal baths of mechanical modes 0, 1, 2 ... (then repeating)
_THERMAL = ("#2ca02c", "#9467bd", "#17becf", "#006d5b", "#6b4c9a")
# sources nobody named yet
_RESERVE = ("#8e6c8a", "#5b7e96", "#a0522d", "#4f7942", "#d95f02", "#6a7b8c")

THERMAL_SUFFIX = " thermal bath"
TONE_MARK = " of tone "
# shade of the n-th tone's copy of a source: fraction mixed in, towards black (< 0) or
# white (> 0). A dark colour lightens, a light one darkens, one in between goes both
# ways in turn, so the first three copies of any colour here differ by ≥ 0.1 in
# relative luminance (readable in greyscale); further copies by less
_TONE_SHADES = {"dark": (0.0, 0.4, 0.65, 0.82, 0.92), "light": (0.0, -0.4, -0.65, -0.82, -0.92),
                "mid": (0.0, -0.45, 0.5, -0.7, 0.75)}
_DARK, _LIGHT = 0.2, 0.55  # relative luminance bounds of "dark" and "light" colours
_LUMINANCE = (0.2126, 0.7152, 0.0722)  # ITU-R BT.709 weights of R, G, B (gamma left out)
_TERM_STYLES = (("imprecision × back-action", "--"), ("imprecision", ":"),
                ("motion", "-"), ("correlation", "-."),
                # the chain's terms of one source: signal lost solid, the
                # sample averaging dashed, aliasing dotted, the low-pass dash-dot
                ("half the signal", "--"), ("average over each sample", "--"),
                ("aliasing", ":"), ("low-pass", "-."))


def split_tone(source):
    """(source without its tone, tone or None) of a source name "<source> of tone <tone>"."""
    base, mark, tone = source.rpartition(TONE_MARK)
    return (base, tone) if mark and base else (source, None)


def shade(colour, index):
    """``colour`` as an RGB triple in the shade of the tone numbered ``index`` (0: itself)."""
    from matplotlib.colors import to_rgb

    rgb = to_rgb(colour)
    lightness = sum(w * c for w, c in zip(_LUMINANCE, rgb, strict=True))
    mixes = _TONE_SHADES["dark" if lightness < _DARK else "light" if lightness > _LIGHT
                         else "mid"]
    mix = mixes[index % len(mixes)]
    target = 1.0 if mix > 0 else 0.0
    return tuple(c + abs(mix) * (target - c) for c in rgb)


def source_colour(source, mode_names=(), tone_names=()):
    """Colour of noise source ``source`` (see the module notes).

    A tone's copy of a source ("... of tone probe") takes the source's colour
    in the shade of the tone's place in ``tone_names`` (by default, or for a
    tone not listed, a place chosen by a checksum of its name).
    """
    base, tone = split_tone(source)
    if tone is not None:
        tones = list(tone_names)
        index = tones.index(tone) if tone in tones else zlib.crc32(tone.encode())
        return shade(source_colour(base, mode_names), index)
    if source.endswith(THERMAL_SUFFIX):
        name = source[: -len(THERMAL_SUFFIX)]
        if name in mode_names:
            return _THERMAL[list(mode_names).index(name) % len(_THERMAL)]
        return _THERMAL[zlib.crc32(name.encode()) % len(_THERMAL)]
    for key, colour in _NAMED:
        if key in source:
            return colour
    return _RESERVE[zlib.crc32(source.encode()) % len(_RESERVE)]


def split_term(name):
    """(source, term) of a budget term "source: term"; a correlation keeps its first source."""
    if ": " in name:
        source, term = name.split(": ", 1)
        return source, term
    if name.endswith(" correlation") and " × " in name:
        return name.split(" × ", 1)[0], "correlation"
    return name, ""


def term_style(name, mode_names=None, names=()):
    """Matplotlib ``color`` and ``ls`` of budget term ``name``.

    ``mode_names`` orders the thermal baths; by default the order in which
    their terms appear in ``names`` (a budget lists modes in scenario order).
    The tones' copies of a source are shaded in the order their tones appear
    in ``names`` (:func:`tone_order`).
    """
    if mode_names is None:
        mode_names = mode_order(names)
    source, term = split_term(name)
    words = term or source  # a chain term may be one phrase ("electronics low-pass filter")
    style = next((ls for key, ls in _TERM_STYLES if key in words), "-")
    return {"color": source_colour(source, mode_names, tone_order(names)), "ls": style}


def tone_order(names):
    """Tones named by the sources of budget ``names``, in order of first appearance."""
    tones = (split_tone(split_term(name)[0])[1] for name in names)
    return tuple(dict.fromkeys(t for t in tones if t is not None))


def mode_order(names):
    """Mode names of the thermal-bath terms among budget ``names``, in order of appearance."""
    modes = []
    for name in names:
        source = split_term(name)[0]
        if source.endswith(THERMAL_SUFFIX) and source[: -len(THERMAL_SUFFIX)] not in modes:
            modes.append(source[: -len(THERMAL_SUFFIX)])
    return tuple(modes)

"""A drawing's SVG file rendered to PNG (cairosvg), for papers and slides."""

from __future__ import annotations

__all__ = ["png_of"]


def png_of(svg: str, *, label_class: str) -> bytes:
    """Return ``svg`` rendered to PNG at twice its size.

    cairosvg ignores ``paint-order``, so the white halo drawn around the labels (``label_class``,
    e.g. ``.ego-svg .ego-label``) would be painted over their letters: it is switched off here.
    """
    import cairosvg  # a heavy import, needed for PNG files only

    svg = svg.replace("</style>", f"{label_class} {{ stroke: none; }}</style>", 1)
    return cairosvg.svg2png(bytestring=svg.encode("utf-8"), scale=2, unsafe=False)

"""Charts drawn on the server as SVG with pygal: no script, no request leaves the site.

pygal writes the text of labels through an XML library, so names and numbers are escaped. Its
tooltip scripts are switched off (``js=[]``: they would be fetched from outside) and the small
inline script that configures them is taken out, so the chart is a plain picture.
"""

from __future__ import annotations

import pygal
from lxml import etree
from pygal.style import Style

__all__ = ["degree_chart"]

STYLE = Style(
    background="#ffffff",
    plot_background="#ffffff",
    foreground="#1e1d1a",
    foreground_strong="#1e1d1a",
    foreground_subtle="#8a8578",
    opacity="0.9",
    opacity_hover="1",
    colors=("#8b2d1f",),
    font_family='system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", Arial, sans-serif',
    label_font_size=13,
    major_label_font_size=13,
    title_font_size=15,
    tooltip_font_size=13,
    no_data_font_size=20,
)


def degree_chart(counts: list[tuple[int, int]], *, caption: str) -> str:
    """Return an SVG bar chart of how many persons (height) have each degree (position on the axis).

    The degree axis is numeric: a gap between degrees is drawn as a gap, so a long tail of a few
    very connected persons shows as such.
    """
    chart = pygal.Histogram(
        style=STYLE, js=[], disable_xml_declaration=True, width=760, height=340, explicit_size=False,
        show_legend=False, title=caption if len(caption) <= 90 else caption[:89] + "…",
        x_title="degree: persons tied to", y_title="persons", print_values=False, show_y_guides=True,
        show_x_guides=False, margin=12, no_data_text="no person in this slice", truncate_label=-1,
    )  # fmt: skip
    chart.add("persons", [(persons, degree - 0.4, degree + 0.4) for degree, persons in counts])
    return _without_scripts(chart.render(is_unicode=True))


def _without_scripts(svg: str) -> str:
    root = etree.fromstring(svg.encode())
    for element in list(root.iter("{http://www.w3.org/2000/svg}script", etree.Comment)):
        element.getparent().remove(element)
    return etree.tostring(root, encoding="unicode")

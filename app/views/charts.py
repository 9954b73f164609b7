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
    very connected persons shows as such. Both axes are ticked at whole numbers only (a person
    count or a degree has no fractions), and the degree axis starts one below the lowest degree,
    so the first bar stands clear of the vertical axis.
    """
    highest_degree = max((degree for degree, _ in counts), default=0)
    lowest_degree = min((degree for degree, _ in counts), default=0)
    most_persons = max((persons for _, persons in counts), default=0)
    y_ticks = integer_ticks(0, max(most_persons, 1))
    chart = pygal.Histogram(
        style=STYLE, js=[], disable_xml_declaration=True, width=760, height=340, explicit_size=False,
        show_legend=False, title=caption if len(caption) <= 90 else caption[:89] + "…",
        x_title="degree: persons tied to", y_title="persons", print_values=False, show_y_guides=True,
        show_x_guides=False, margin=12, no_data_text="no person in this slice", truncate_label=-1,
        range=(0, y_ticks[-1]), y_labels=y_ticks,
        x_labels=integer_ticks(lowest_degree, highest_degree), value_formatter=str, x_value_formatter=str,
    )  # fmt: skip
    chart.add("persons", [(persons, degree - 0.4, degree + 0.4) for degree, persons in counts])
    if counts:  # pygal's histogram has no x range: two empty bars one below and one above hold the margins
        chart.add("margin", [(0, lowest_degree - 1, lowest_degree - 1), (0, highest_degree + 1, highest_degree + 1)])
    return _axis_at_left_edge(_without_scripts(chart.render(is_unicode=True)))


def integer_ticks(low: int, high: int, *, most: int = 8) -> list[int]:
    """Return whole-number ticks from ``low`` covering ``high``, a step of 1, 2 or 5 times a power of ten.

    >>> integer_ticks(0, 3)
    [0, 1, 2, 3]
    >>> integer_ticks(0, 41)
    [0, 10, 20, 30, 40, 50]
    >>> integer_ticks(2, 57)
    [0, 10, 20, 30, 40, 50, 60]
    """
    step, scale = 1, 1
    while (high - low) / step > most:
        for factor in (2, 5, 10):
            step = factor * scale
            if (high - low) / step <= most:
                break
        scale *= 10
    first = low - low % step
    last = high if high % step == 0 else high + step - high % step
    return list(range(first, last + 1, step))


def _axis_at_left_edge(svg: str) -> str:
    """Drop the margin bars; move the vertical axis line from degree 0 (through the first bar) to the plot's left edge."""
    root = etree.fromstring(svg.encode())
    for margin in root.iterfind(".//{*}g[@class='series serie-1 color-1']"):
        margin.getparent().remove(margin)
    for path in root.iterfind(".//{*}g[@class='axis x']/{*}g[@class='guides']/{*}path"):
        if path.get("class", "").split()[:1] == ["axis"]:
            height = path.get("d").split("v")[-1]
            path.set("d", f"M0.000000 0.000000 v{height}")
    return etree.tostring(root, encoding="unicode")


def _without_scripts(svg: str) -> str:
    root = etree.fromstring(svg.encode())
    for element in list(root.iter("{http://www.w3.org/2000/svg}script", etree.Comment)):
        element.getparent().remove(element)
    return etree.tostring(root, encoding="unicode")

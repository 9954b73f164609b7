"""What each measure means, in plain words, and where it was published.

The pages show these beside the numbers, so that a reader who does not know the trade term can
still tell what a high value says about a person, and where to read more.
"""

from __future__ import annotations

from dataclasses import dataclass

from app.documented import DOCUMENTED

__all__ = ["FAMILIES", "MEASURE_INFO", "Definition"]


@dataclass(frozen=True)
class Definition:
    """A measure's name on screen, its meaning in plain words and its published reference."""

    __pydantic_config__ = DOCUMENTED

    name: str
    """The name used in URLs (``betweenness``)."""
    label: str
    """The name shown on screen."""
    definition: str
    """What the figure says about a person, in plain words."""
    reference: str
    """Where the measure was published."""


FREEMAN_1979 = "Freeman, L. C. (1979). Centrality in social networks: conceptual clarification. Social Networks 1(3), 215–239."
WASSERMAN_FAUST = "Wasserman, S., & Faust, K. (1994). Social Network Analysis: Methods and Applications. Cambridge University Press."
STRENGTH = ("Barrat, A., Barthélemy, M., Pastor-Satorras, R., & Vespignani, A. (2004). The architecture of complex "
            "weighted networks. PNAS 101(11), 3747–3752.")
WEIGHTED_PATHS = ("Newman, M. E. J. (2001). Scientific collaboration networks II: shortest paths, weighted networks, and "
                  "centrality. Physical Review E 64, 016132; Opsahl, T., Agneessens, F., & Skvoretz, J. (2010). Node "
                  "centrality in weighted networks. Social Networks 32(3), 245–251.")
BETWEENNESS = ("Freeman, L. C. (1977). A set of measures of centrality based on betweenness. Sociometry 40(1), 35–41; "
               "Brandes, U. (2001). A faster algorithm for betweenness centrality. Journal of Mathematical Sociology "
               "25(2), 163–177.")

MEASURE_INFO: dict[str, Definition] = {d.name: d for d in [
    Definition("degree", "Degree",
               "How many other persons this person is tied to, whichever way the ties run.", FREEMAN_1979),
    Definition("in_degree", "In-degree",
               "How many persons have a tie that arrives at this person: letters received, clients, children.",
               FREEMAN_1979 + " " + WASSERMAN_FAUST),
    Definition("out_degree", "Out-degree",
               "How many persons this person has a tie towards: letters sent, patrons served, children.",
               FREEMAN_1979 + " " + WASSERMAN_FAUST),
    Definition("strength", "Strength",
               "The sum of the weights of the person's ties: with the default weight, how many documents in all "
               "attest their ties, counted per tie.", STRENGTH),
    Definition("in_strength", "In-strength",
               "The sum of the weights of the ties that arrive at the person.", STRENGTH),
    Definition("out_strength", "Out-strength",
               "The sum of the weights of the ties that leave the person.", STRENGTH),
    Definition("closeness", "Closeness",
               "How near the person is to everyone else, counting ties along the shortest paths; corrected so that a "
               "person in a small separate piece of the network does not look close to all.",
               FREEMAN_1979 + " " + WASSERMAN_FAUST + " (p. 201)"),
    Definition("harmonic", "Harmonic closeness",
               "The average of 1 ÷ distance to every other person; persons out of reach add nothing, so it needs no "
               "correction when the network is in pieces.",
               "Marchiori, M., & Latora, V. (2000). Harmony in the small-world. Physica A 285(3–4), 539–546."),
    Definition("betweenness", "Betweenness",
               "How much of the shortest paths between other persons pass through this person: a broker or "
               "gatekeeper between parts of the network.", BETWEENNESS),
    Definition("weighted_closeness", "Weighted closeness",
               "Closeness in which a tie attested by more documents counts as shorter (its length is 1 ÷ weight).",
               WEIGHTED_PATHS),
    Definition("weighted_betweenness", "Weighted betweenness",
               "Betweenness along the shortest paths when a tie attested by more documents counts as shorter "
               "(its length is 1 ÷ weight).", WEIGHTED_PATHS + " " + BETWEENNESS.split("; ")[1]),
    Definition("eigenvector", "Eigenvector centrality",
               "High when the person is tied to persons who are themselves well tied.",
               "Bonacich, P. (1987). Power and centrality: a family of measures. American Journal of Sociology "
               "92(5), 1170–1182."),
    Definition("pagerank", "PageRank",
               "The share of time a walker who follows the ties at random, and now and then jumps to anyone, spends "
               "at the person.",
               "Page, L., Brin, S., Motwani, R., & Winograd, T. (1999). The PageRank citation ranking: bringing order "
               "to the web. Stanford InfoLab technical report 1999-66."),
]}
"""Every centrality by its name in URLs."""

FAMILIES: dict[str, Definition] = {d.name: d for d in [
    Definition("summary", "The slice at a glance",
               "How many persons and ties the slice holds, how dense and clustered it is, how it falls into pieces, "
               "how far apart persons are, and how many persons have how many ties.", WASSERMAN_FAUST),
    Definition("centrality", "Who is central",
               "Persons ranked by one measure of centrality: ties, closeness, brokerage, or ties to the well tied.",
               FREEMAN_1979),
    Definition("components", "Separate pieces",
               "The parts of the network that no tie joins, every one of them, the persons without ties too.",
               WASSERMAN_FAUST + " (ch. 4)"),
    Definition("cut-points", "Cut points and bridges",
               "The persons, and the ties, whose loss would split a piece of the network in two or more.",
               "Hopcroft, J., & Tarjan, R. (1973). Algorithm 447: efficient algorithms for graph manipulation. "
               "Communications of the ACM 16(6), 372–378."),
    Definition("cliques", "Cliques",
               "Groups in which everyone is tied to everyone else, and no one else could join.",
               "Luce, R. D., & Perry, A. D. (1949). A method of matrix analysis of group structure. Psychometrika "
               "14(2), 95–116; Bron, C., & Kerbosch, J. (1973). Algorithm 457. Communications of the ACM 16(9), 575–577."),
    Definition("communities", "Communities",
               "Groups of persons more tied among themselves than to the rest, found by a seeded search, with how "
               "far other seeds agree.",
               "Blondel, V. D., Guillaume, J.-L., Lambiotte, R., & Lefebvre, E. (2008). Fast unfolding of communities "
               "in large networks. J. Stat. Mech. P10008; Traag, V. A., Waltman, L., & van Eck, N. J. (2019). From "
               "Louvain to Leiden: guaranteeing well-connected communities. Scientific Reports 9, 5233."),
]}
"""The measure pages by their path under /network/."""

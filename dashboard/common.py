"""What the entry script hands to every page: library, curves, ranking, comparison set."""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np
import streamlit as st

from dashboard import data
from engine.base.errors import LibraryError, QuietgradeError
from engine.curves.mastercurve import MasterCurve
from engine.library.store import Library
from engine.selection.ranking import Criteria, RankResult

CONTEXT_KEY = "_context"
MISSING = "–"  # shown in tables where a value is unknown or not computed
SHOWN_LIMIT = 8  # grades of the comparison set drawn on the Curves and Mount pages
# Characters Streamlit's markdown reads as markup wherever they stand, written with a
# backslash by plain(): the CommonMark punctuation of emphasis and code spans, tables,
# strike-through, math ($), attribute braces, and the mailbox sign of e-mail autolinks.
_MARKDOWN_SPECIALS = re.compile(r"([\\`*_{}|~$@])")
# A link or image needs its text's closing "]" before "(" (inline) or "[" (a full
# reference): that "]" is escaped, and so is a "[" at the start (a definition "[a]: url"
# or a footnote); "speeds [rpm]" stays as it is.
_LINK_CLOSE = re.compile(r"\](?=[(\[])")
# Where a colon would start a Streamlit directive (:red[...], :material/icon:, :small[...])
# or a bare web address becomes a link (http://...), or www. a link.
_COLON_DIRECTIVE = re.compile(r":(?=[A-Za-z/])")
_WWW = re.compile(r"(?i)\b(www)\.")
# Icons and the logo Streamlit finds in the text itself, escapes resolved: ":material/x:"
# (its slash escaped, so Streamlit does not rewrite it to ":material_x:") and
# ":streamlit:" (a word joiner, U+2060, before its last colon).
_ICON = re.compile(r"(\\:material)/")
_LOGO = re.compile(r"(\\:streamlit):")
# What starts a block at the start of a line: a heading, list item or rule marker, a link
# definition or footnote ("[" at the start), and the number of a numbered item (its "." or
# ")" is escaped); a quote's ">" is an entity.
_BLOCK_START = re.compile(r"^[#+\-=\[]")
_NUMBERED = re.compile(r"^(\d+)([.)])")
# HTML: "<" where it would open a tag, a comment or an autolink, "&" where it would start
# a character reference, ">" at the start (a quote), written as entities; elsewhere they
# are plain text ("needs < 1", "f/fn >= 1.41", "Gent & Lindley").
_TAG_OPEN = re.compile(r"<(?=[A-Za-z/!?])")
_REFERENCE = re.compile(r"&(?=[#A-Za-z0-9])")
_QUOTE = re.compile(r"^>")

SCREENING_CAPTION = (
    "**Material screening only.** No mount is checked, so this ranking says nothing about "
    "isolation (transmissibility, resonance, the drift of the natural frequency). Switch on "
    "'Check a mount' in the sidebar (Mount) to rank the grades as mounts."
)


def plain(value) -> str:
    """Text from data (an id, a name, a note, a reason quoting a file's cell, a link
    parameter) for a markdown element, shown as it is written and never as markup.

    On one line (runs of white space, line breaks included, become one space); markdown
    specials written with a backslash; ``<`` and ``&`` as entities where they would open
    a tag, an autolink (``<http://...>``) or a character reference; a colon before a
    letter or a slash escaped, so no colour, icon or other directive (``:red[...]``,
    ``:material/...:``) forms and no bare web address becomes a link; a heading, list,
    quote or numbered-item marker at the start escaped. Rendered, the text reads as it
    was written (invisibly, a word joiner stops ``:streamlit:`` becoming the logo).
    """
    text = " ".join(("" if value is None else str(value)).split())
    text = _REFERENCE.sub("&amp;", text)
    text = _TAG_OPEN.sub("&lt;", text)
    text = _QUOTE.sub("&gt;", text)
    text = _MARKDOWN_SPECIALS.sub(r"\\\1", text)
    text = _LINK_CLOSE.sub(r"\\]", text)
    text = _COLON_DIRECTIVE.sub(r"\\:", text)
    text = _WWW.sub(r"\1\\.", text)
    text = _ICON.sub(r"\1\\/", text)
    text = _LOGO.sub("\\1\u2060:", text)
    text = _BLOCK_START.sub(r"\\\g<0>", text)
    return _NUMBERED.sub(r"\1\\\2", text)


@dataclass
class Context:
    library: Library
    curves: Mapping[str, MasterCurve]  # decoded on first use
    fit_errors: dict[str, str]
    criteria: Criteria | None
    result: RankResult | None
    problem: str | None
    compare: list[str]
    colours: dict[str, str]
    result_key: str | None = None  # names the ranking for the figure caches (data.py)
    notes: list[str] = field(default_factory=list)

    def ranking(self) -> RankResult | None:
        """The ranking this context was made with, for the callbacks of the next rerun:
        after its run the context lets go of it (:meth:`let_go`), and it is fetched
        again from the dashboard's kept rankings (ranked again if they let it go)."""
        if self.result is None and self.result_key is not None and self.criteria is not None:
            try:
                self.result = data.ranked(self.library, self.criteria)
            except QuietgradeError:  # the rerun that follows says why on the page
                return None
        return self.result

    def let_go(self) -> None:
        """Drop the ranking once the run is over. A session outlives its page (Streamlit
        keeps a closed one for a while), and a ranking of 10,000 grades holds about
        120 MB: the rankings in memory are then those the dashboard keeps within its
        budget (:data:`dashboard.data.RANKINGS_KEPT_GRADES`), not one more per session."""
        self.result = None

    def ranking_name(self) -> str:
        """``result_key``, set whenever ``result`` is (the entry script names each ranking)."""
        if self.result_key is None:
            raise RuntimeError("the ranking has no name for the figure caches")
        return self.result_key

    def points(self, material_id: str) -> np.ndarray | None:
        """Measured points of a grade (degC, Hz, Pa, loss factor), or None."""
        try:
            return data.measured_points(self.library.location, self.library.version(), material_id)
        except LibraryError:  # a grade without data: the charts show the model only
            return None


def context() -> Context:
    return st.session_state[CONTEXT_KEY]


def need_result(ctx: Context) -> RankResult | None:
    """The ranking, or a message saying why there is none (and None)."""
    if ctx.result is None:
        st.error(
            plain(ctx.problem) if ctx.problem else "no ranking: the library holds no fitted grade"
        )
        return None
    return ctx.result


def screening_caption(result: RankResult) -> None:
    """Say so above a ranking of an isolation mount made without a mount check."""
    if result.criteria.screening_only:
        st.caption(SCREENING_CAPTION)

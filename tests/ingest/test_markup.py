"""Markdown, reStructuredText and AsciiDoc reduce to their text; headings and list items stay."""

from __future__ import annotations

import time

import pytest
from hypothesis import given
from hypothesis import strategies as st

from dedup.ingest.markup import reduce_markup

MARKDOWN = """---
title: Leave policy
owner: HR
---

Leave policy
============

## Annual *leave*

- Staff get **25 days** a year, see [the form](https://intranet/form.pdf).
1. Ask your manager ![calendar](cal.png)
   > Quoted `note` with a <span class="x">tag</span>

| Grade | Days |
|-------|-----:|
| A     | 25   |

```python
print("code stays")
```

[form]: https://intranet/form.pdf
***
snake_case_name stays; \\*escaped\\*
"""


def test_markdown_keeps_headings_lists_and_link_texts():
    text, title = reduce_markup(MARKDOWN, "markdown")
    assert title == "Leave policy"
    lines = text.split("\n")
    assert "Annual leave" in lines
    assert "Staff get 25 days a year, see the form." in lines
    assert "Ask your manager calendar" in lines
    assert "Quoted note with a tag" in lines
    assert "Grade Days" in lines and "A 25" in lines
    assert 'print("code stays")' in lines
    assert "snake_case_name stays; *escaped*" in lines
    for marker in ("---", "owner: HR", "====", "```", "https://", "***", "|", "**", "##"):
        assert marker not in text, marker


RST = """=============
Leave policy
=============

.. contents::
   :depth: 2

Intro with **bold**, *em*, ``code``, `a link <https://x>`_ and :ref:`the rules <rules>`.

.. _rules:

Annual leave
------------

- first item
#. numbered item

.. note:: Managers approve leave.

.. image:: chart.png
   :alt: chart

.. a comment that is not text

Example::

    indented literal

Python's __init__ stays; a reference_ loses its mark [1]_.
"""


def test_restructuredtext_keeps_titles_and_items():
    text, title = reduce_markup(RST, "restructuredtext")
    assert title == "Leave policy"
    lines = [line.strip() for line in text.split("\n")]
    assert "Intro with bold, em, code, a link and the rules." in lines
    assert "Annual leave" in lines and "first item" in lines and "numbered item" in lines
    assert "Managers approve leave." in lines
    assert "Example:" in lines and "indented literal" in lines
    assert "Python's __init__ stays; a reference loses its mark." in lines
    for marker in ("===", "---", "contents", ":depth:", "chart", "comment", "https://", "_rules"):
        assert marker not in text, marker


ASCIIDOC = """= Leave policy
:author: HR
:toc:

== Annual *leave*

[source,python]
----
print("code stays")
----

* Staff get *25 days*, see link:https://intranet/form.pdf[the form]
. Ask xref:managers[your manager]
.Block title
term:: its definition
// a comment
////
a comment block
////
|===
| Grade | Days
|===
"""


def test_asciidoc_keeps_headings_and_items():
    text, title = reduce_markup(ASCIIDOC, "asciidoc")
    assert title == "Leave policy"
    lines = text.split("\n")
    for line in (
        "Annual leave",
        'print("code stays")',
        "Staff get 25 days, see the form",
        "Ask your manager",
        "Block title",
        "term: its definition",
        "Grade Days",
    ):
        assert line in lines, line
    for marker in (":author:", ":toc:", "[source", "----", "comment", "|===", "https://"):
        assert marker not in text, marker


def test_plain_text_is_kept_as_it_is():
    text = "  * not markup here *\n# not a heading\n"
    assert reduce_markup(text, "text") == (text, "* not markup here *")


@pytest.mark.parametrize("fmt", ["markdown", "restructuredtext", "asciidoc"])
@pytest.mark.parametrize(
    "unit", ["[a](", "**a ", "_x_ ", "``a", "ab:ab:", "http:x[", "<<a,", ":r:`x <", "|a"]
)
def test_hostile_lines_reduce_in_linear_time(fmt, unit):
    hostile = ((unit * (15_000 // len(unit))) + "\n") * 40 + unit * 1_000_000
    started = time.perf_counter()
    reduce_markup(hostile, fmt)
    assert time.perf_counter() - started < 3.0


@given(st.text(alphabet=st.sampled_from(list("#*_`[]()<>|:=-.!+\\ \nab12")), max_size=400))
def test_any_markup_reduces_without_error(text):
    for fmt in ("markdown", "restructuredtext", "asciidoc"):
        body, title = reduce_markup(text, fmt)
        assert isinstance(body, str) and isinstance(title, str) and len(title) <= 200

"""HTML and XHTML pages: the main text and the title, without page furniture."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from dedup.ingest.html_text import HtmlError, declared_charset, html_to_text

PAGE = """<!DOCTYPE html>
<html><head><title>Guest  wifi</title><style>p { color: red }</style>
<script>track("visit")</script></head>
<body>
<header><a href="/">Intranet home</a></header>
<nav><ul><li>Knowledge base</li><li>IT</li></ul></nav>
<div role="navigation">Breadcrumbs</div>
<article><h1>Guest wifi</h1>
<p>Visitors   can use
the guest network.</p>
<ul><li>Ask reception</li><li>Get a code</li></ul>
<pre>  keep   spacing</pre>
<p>Tom &amp; Jerry&nbsp;&#8212; &lt;ok&gt;</p>
</article>
<aside>Related articles</aside>
<footer>Copyright the cooperative</footer>
<noscript>Enable scripts</noscript>
</body></html>"""


def test_furniture_scripts_and_styles_are_dropped():
    text, title = html_to_text(PAGE)
    assert title == "Guest wifi"
    lines = text.split("\n")
    assert lines[0] == "Guest wifi"
    assert "Visitors can use the guest network." in lines
    assert "Ask reception" in lines and "Get a code" in lines
    assert "keep   spacing" in lines
    assert "Tom & Jerry — <ok>" in lines  # references decoded; a no-break space is a space
    for dropped in (
        "track",
        "color",
        "Intranet home",
        "Knowledge base",
        "Breadcrumbs",
        "Related",
        "Copyright",
        "Enable",
    ):
        assert dropped not in text, dropped


def test_keep_all_keeps_the_furniture_but_never_scripts():
    text, _ = html_to_text(PAGE, keep_all=True)
    for kept in ("Intranet home", "Knowledge base", "Breadcrumbs", "Related articles", "Copyright"):
        assert kept in text, kept
    assert "track" not in text and "color" not in text


def test_main_element_is_the_text_when_present():
    page = "<body><div>Site banner text</div><main><p>The article.</p></main><div>Cookie notice</div></body>"
    assert html_to_text(page)[0] == "The article."
    assert "Cookie notice" in html_to_text(page, keep_all=True)[0]
    # An empty <main> falls back to the body rather than losing the page.
    assert "Site banner text" in html_to_text("<body><main></main><p>Site banner text</p></body>")[0]


def test_unclosed_and_misnested_tags():
    text, title = html_to_text("<html><head><title>T</title><body><nav>menu<p>para one<div>two")
    assert title == "T" and text == ""  # an unclosed nav holds everything after it
    text, _ = html_to_text("<body><aside><p>side</aside><p>after the aside</p>")
    assert text == "after the aside"


def test_xhtml_with_declaration_cdata_and_self_closing_tags():
    page = (
        '<?xml version="1.0" encoding="UTF-8"?>\n<html xmlns="http://www.w3.org/1999/xhtml">'
        "<head><title>X</title></head><body><p>one<br/>two</p><![CDATA[ignored]]></body></html>"
    )
    text, title = html_to_text(page)
    assert title == "X" and text.split("\n")[:2] == ["one", "two"]


def test_svg_title_is_not_the_page_title():
    assert html_to_text("<body><svg><title>icon</title></svg><h1>Real</h1></body>") == ("Real", "")


@pytest.mark.parametrize(
    ("head", "charset"),
    [
        (b'<meta charset="windows-1252">', "windows-1252"),
        (b'<meta http-equiv="Content-Type" content="text/html; charset=ISO-8859-1">', "ISO-8859-1"),
        (b'<?xml version="1.0" encoding="koi8-r"?><html>', "koi8-r"),
        (b"<p>no declaration</p>", None),
    ],
)
def test_declared_charset(head, charset):
    assert declared_charset(head) == charset


@given(st.text(alphabet=st.sampled_from(list("<>/!-[]&#;=\"' abcdiv?xCDATA\n")), max_size=300))
def test_any_markup_parses_or_raises_a_clear_error(markup):
    try:
        text, title = html_to_text(markup)
    except HtmlError as err:
        assert "the HTML parser stopped at line" in str(err)
    else:
        assert isinstance(text, str) and isinstance(title, str)

"""The HTML audit report: one self-contained file, rendered from jinja2 templates.

Safety: autoescaping is on for every template, so document text, paths and metadata
never become markup. Data for the page's script travels in one
``<script type="application/json">`` block, JSON-encoded with ``<``, ``>`` and ``&``
escaped so no text can close the block; the script reads it with ``JSON.parse`` and
writes document text with ``textContent`` only. A Content-Security-Policy meta tag
forbids every remote load and allows only our own inline script, by its SHA-256 hash.

Scale: the page draws clusters from the data block a page at a time and builds the
evidence view of a pair only when it is opened, so 10,000 clusters open quickly.
"""

from __future__ import annotations

import base64
import hashlib
import json
import os
from collections.abc import Iterator
from functools import lru_cache

import jinja2

from .._version import __version__
from . import charts
from .evidence import pair_evidence

__all__ = ["render_html", "iter_html", "report_data", "template_folder", "embed_json", "iter_embed_json"]

# Evidence is precomputed for at most this many pairs; beyond, the report says so.
MAX_EVIDENCE_PAIRS = 50_000
# Characters of each document's text carried into the report (longer texts are cut, and marked).
MAX_TEXT_CHARS = 200_000


def template_folder() -> str:
    """Where the templates are: inside the installed package, or at the top of a checkout."""
    here = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    for candidate in (
        os.path.join(here, "report_templates"),
        os.path.join(os.path.dirname(here), "report_templates"),
    ):
        if os.path.isdir(candidate):
            return candidate
    raise FileNotFoundError("report templates not found: reinstall dedup (pip install -e .)")


@lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(template_folder()),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters["pct"] = lambda x: "" if x is None else f"{x:.1%}"
    env.filters["thousands"] = lambda x: f"{x:,}"
    return env


def embed_json(data: object) -> str:
    """JSON that is safe inside a ``<script>`` element: it can never close the element."""
    return _script_safe(json.dumps(data, ensure_ascii=False, separators=(",", ":"), allow_nan=False))


def iter_embed_json(data: dict) -> Iterator[str]:
    """`embed_json` of a dict in pieces: each member of a top-level list or dict is
    encoded on its own (by the compiled encoder), so the whole text is never held.

    >>> "".join(iter_embed_json({"a": [1, "</script>"], "b": {"k": None}, "c": 2})) == embed_json(
    ...     {"a": [1, "</script>"], "b": {"k": None}, "c": 2})
    True
    """
    encode = json.JSONEncoder(ensure_ascii=False, separators=(",", ":"), allow_nan=False).encode
    yield "{"
    for n, (key, value) in enumerate(data.items()):
        yield ("," if n else "") + _script_safe(encode(key)) + ":"
        if isinstance(value, list):
            yield "["
            for k, item in enumerate(value):
                yield ("," if k else "") + _script_safe(encode(item))
            yield "]"
        elif isinstance(value, dict):
            yield "{"
            for k, (inner, item) in enumerate(value.items()):
                yield ("," if k else "") + _script_safe(encode(str(inner))) + ":" + _script_safe(encode(item))
            yield "}"
        else:
            yield _script_safe(encode(value))
    yield "}"


def _script_safe(text: str) -> str:
    return (
        text.replace("&", "\\u0026")
        .replace("<", "\\u003c")
        .replace(">", "\\u003e")
        .replace("\u2028", "\\u2028")
        .replace("\u2029", "\\u2029")
    )


def report_data(result, progress=None) -> dict:
    """Compact data for the page script: documents by index, clusters, evidence, ledger.

    ``progress`` (a `dedup.progress.Progress`) is advanced once per evidence pair.
    """
    settings = result.settings
    shingle_size = settings.char_ngrams or settings.shingle_size
    doc_index: dict[str, int] = {}
    documents = []
    by_id = {d["id"]: d for d in result.documents}

    def index_of(doc_id: str) -> int:
        if doc_id not in doc_index:
            doc_index[doc_id] = len(documents)
            d = by_id[doc_id]
            documents.append([doc_id, d["title"], d["bytes"], d["content_hash"]])
        return doc_index[doc_id]

    # Pairs by the cluster of their documents, found once (not per cluster).
    cluster_of = {m["document_id"]: c["id"] for c in result.clusters for m in c["members"]}
    pairs_of: dict[str, dict[tuple[str, str], dict]] = {}
    for p in result.pairs:
        home = cluster_of.get(p["left"])
        if home is not None and home == cluster_of.get(p["right"]):
            pairs_of.setdefault(home, {})[(p["left"], p["right"])] = p
    clusters = []
    evidence_pairs: list[tuple[int, int]] = []
    for c in result.clusters:
        keeper = index_of(c["keeper"])
        members = []
        for m in c["members"]:
            i = index_of(m["document_id"])
            sim = m["similarity_to_keeper"] or {}
            members.append(
                [
                    i,
                    m["role"],
                    sim.get("jaccard"),
                    sim.get("containment_in_keeper"),
                    sim.get("keeper_containment"),
                    sim.get("cosine"),
                    m["deciding_score"],
                    index_of(m["linked_through"]) if m["linked_through"] else -1,
                    m["action"],
                    m["reason"],
                ]
            )
            if i != keeper:
                evidence_pairs.append((i, keeper))
        edges = []
        for (a, b), p in pairs_of.get(c["id"], {}).items():
            ia, ib = index_of(a), index_of(b)
            edges.append([ia, ib, p["deciding_score"], p["kind"]])
            evidence_pairs.append((ia, ib))
        clusters.append(
            [
                c["id"],
                c["size"],
                c["kind"],
                keeper,
                c["retire_documents"],
                c["retire_bytes"],
                c["lowest_similarity_to_keeper"],
                members,
                edges,
                c.get("review"),
            ]
        )
    texts = {}
    for doc_id, i in doc_index.items():
        text = result.texts.get(doc_id, "")
        texts[i] = text[:MAX_TEXT_CHARS]
    evidence = {}
    seen = set()
    for a, b in evidence_pairs:
        key = (min(a, b), max(a, b))
        if key in seen or len(evidence) >= MAX_EVIDENCE_PAIRS:
            continue
        seen.add(key)
        evidence[f"{key[0]}:{key[1]}"] = pair_evidence(
            texts[key[0]], texts[key[1]], shingle_size
        ).to_compact()
        if progress is not None:
            progress.advance()
    skipped = [[e.input, e.record, e.status, e.reason] for e in result.ledger if e.status != "read"]
    return {
        "audit_id": result.audit_id,
        "threshold": settings.threshold,
        "measure": settings.measure,
        "documents": documents,
        "texts": texts,
        "clusters": clusters,
        "evidence": evidence,
        "evidence_complete": len(evidence) < MAX_EVIDENCE_PAIRS,
        "text_limit": MAX_TEXT_CHARS,
        "skipped": skipped,
        "decision_schema": "dedup-review-decisions/1",
    }


def _csp_hash(script: str) -> str:
    return "sha256-" + base64.b64encode(hashlib.sha256(script.encode("utf-8")).digest()).decode()


def render_html(result) -> str:
    """The report for an `AuditResult` as an HTML string."""
    return "".join(iter_html(result))


# Stands for the data block while the page around it is rendered.
_DATA_MARK = "\u0000audit-data\u0000"


def iter_html(result, progress=None) -> Iterator[str]:
    """The report in pieces, for writing without holding the page (it can be large)."""
    env = _environment()
    folder = template_folder()
    with open(os.path.join(folder, "report.js"), encoding="utf-8") as handle:
        script = handle.read()
    with open(os.path.join(folder, "report.css"), encoding="utf-8") as handle:
        style = handle.read()
    near_scores = [p["deciding_score"] for p in result.pairs if p["kind"] == "near"]
    recall = result.candidates["expected_recall"]
    chart_svgs = [
        charts.similarity_histogram(near_scores, result.settings.threshold, result.settings.measure),
        charts.s_curve(recall["bands"], recall["rows"], result.candidates["lsh_threshold"]),
        charts.cluster_sizes([c["size"] for c in result.clusters]),
    ]
    page = env.get_template("report.html.j2").render(
        result=result,
        settings=result.settings.to_dict(),
        version=__version__,
        generated=result.run.get("started", ""),
        charts=chart_svgs,
        data_json=_DATA_MARK,
        script=script,
        style=style,
        script_hash=_csp_hash(script),
        style_hash=_csp_hash(style),
    )
    before, after = page.split(_DATA_MARK)
    yield before
    yield from iter_embed_json(report_data(result, progress))
    yield after

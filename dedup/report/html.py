"""The HTML audit report: one self-contained file, rendered from jinja2 templates.

Safety: autoescaping is on for every template, so document text, paths and metadata
never become markup. Data for the page's script travels in one
``<script type="application/json">`` block, JSON-encoded with ``<``, ``>`` and ``&``
escaped so no text can close the block; the script reads it with ``JSON.parse`` and
writes document text with ``textContent`` only. A Content-Security-Policy meta tag
forbids every remote load and allows only our own inline script, by its SHA-256 hash.

Scale: the first screen needs only the list of clusters, so that is all the page parses
when it opens. The rest is packed: each cluster's details (members, scores, pairs and
their shared passages as arrays of numbers) and the text of each clustered document
(once, cut at `MAX_TEXT_CHARS`) are deflate-compressed in blobs of a few hundred KB,
embedded as base64 in inert ``<script type="application/octet-stream">`` elements (base64
holds no ``<``, so it cannot close them), and inflated by the browser's own
``DecompressionStream`` only when a cluster or a pair is opened. Cost in Python:
O(clustered text + pairs + passages), the compression in threads (zlib releases the GIL);
nothing here looks at single words.
"""

from __future__ import annotations

import base64
import hashlib
import json
import os
import zlib
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from functools import lru_cache

import jinja2

from .._version import __version__
from . import charts

__all__ = [
    "render_html",
    "iter_html",
    "report_data",
    "template_folder",
    "embed_json",
    "iter_embed_json",
    "unpack_blob",
    "unpack_texts",
    "MAX_TEXT_CHARS",
]

# Characters of each document's text carried into the report (longer texts are cut, and marked).
MAX_TEXT_CHARS = 200_000
# Pairs of a cluster other than its members' pairs with the keeper, embedded at most (over all
# clusters, largest impact first); the rest are counted, and listed in pairs.csv.
MAX_OTHER_PAIRS = 100_000
# Characters of cluster details (as JSON) per compressed blob, and of text per text blob: small
# enough that opening a cluster or a pair inflates little (a few ms), large enough that a
# cluster's texts mostly share a blob, which is what packs them well (see `_interleave`).
BLOB_CHARS = 64 * 1024
TEXT_BLOB_CHARS = 1024 * 1024
# Code points per piece of a text blob (see `_interleave`); the page script reads it from the blob.
TEXT_PIECE = 4096
# zlib level: on man pages with edited copies, 5 packs within 1% of 6 (2% of 9) in half the
# time of 6; 1 is twice as fast again but 20% larger.
COMPRESS_LEVEL = 5
# Fields of one embedded passage, in this order.
PASSAGE_FIELDS = ("a_start", "a_end", "b_start", "b_end", "words", "similarity_milli", "moved")


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
def template_environment() -> jinja2.Environment:
    """The jinja environment of every page dedup writes: autoescaped, strict, our filters."""
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
    """The page script's data: the cluster list in plain JSON, everything else in packed blobs.

    Layout (indices are positions in ``documents``)::

        audit_id, threshold, measure, decision_schema, text_limit, skipped   as named
        documents   [document id, ...]: every clustered document once, cluster by cluster,
                    keeper first; cluster c holds documents[first : first + size]
        clusters    [[id, size, kind, first, retire_documents, retire_bytes,
                      lowest_similarity_to_keeper, best pair score, review, blob, slot], ...]
                    (its details are item ``slot`` of the JSON list packed in blob ``blob``)
        passages    {"available": the audit found passages, "pairs": pairs embedded,
                     "other_pairs_left_out": pairs not embedded beyond MAX_OTHER_PAIRS}
        blobs       [base64 of zlib-deflated UTF-8, ...] (written as elements, not in the JSON)

    One cluster's details: ``{"members": [[role, jaccard, containment_in_keeper,
    keeper_containment, cosine, deciding_score, linked_through (index or -1), action,
    reason, pair with the keeper (row of "pairs" or -1)], ...], "docs": [[bytes,
    content_hash, characters, cut (0/1), text blob], ...], "pairs": [[a, b, kind,
    deciding_score, a_covered, b_covered, passages, whole_text_jaccard, templates_left_out
    (as seen from a: "left" is a's)], ...]}`` where members and docs follow
    documents[first:], a text blob is laid out as `_interleave` says, a pair is oriented
    as the audit's passages are (a = their left), and ``passages`` is null when the result
    has no passages at all (made without the passage stage), else a flat list of
    `PASSAGE_FIELDS` per passage (character offsets in code points into the cut texts;
    empty when the stage found none for the pair).

    ``progress`` (a `dedup.progress.Progress`) is advanced once per cluster. Cost
    O(clustered text + pairs + passages).
    """
    documents, firsts = _clustered_documents(result.clusters)
    index_of = {doc_id: i for i, doc_id in enumerate(documents)}
    text_parts, slots = _plan_texts(documents, result.texts)
    found = getattr(result, "passages", None)
    context = _Context(
        documents=documents,
        index_of=index_of,
        by_id={d["id"]: d for d in result.documents},
        slots=slots,
        passages=_passages_by_pair(found) if found is not None else None,
        budget=MAX_OTHER_PAIRS,
    )
    pairs_of = _pairs_by_cluster(result, index_of, firsts)
    rows, details = [], []
    for c, first, end in zip(result.clusters, firsts, firsts[1:] + [len(documents)]):
        detail, best = _cluster_detail(c, range(first, end), pairs_of.get(first, []), context)
        details.append(_compact(detail))
        rows.append(
            [c["id"], end - first, c["kind"], first, c["retire_documents"], c["retire_bytes"],
             _score(c["lowest_similarity_to_keeper"]), _score(best), c.get("review")]
        )  # fmt: skip
        if progress is not None:
            progress.advance()
    detail_parts = _group(details, rows, len(text_parts))
    skipped = [[e.input, e.record, e.status, e.reason] for e in result.ledger if e.status != "read"]
    return {
        "audit_id": result.audit_id,
        "threshold": result.settings.threshold,
        "measure": result.settings.measure,
        "documents": documents,
        "clusters": rows,
        "passages": {
            "available": found is not None,
            "pairs": context.pairs,
            "other_pairs_left_out": context.left_out,
        },
        "text_limit": MAX_TEXT_CHARS,
        "skipped": skipped,
        "decision_schema": "dedup-review-decisions/1",
        "blobs": _pack_all(text_parts + detail_parts),
    }


@dataclass
class _Context:
    """What every cluster's details are built from, and the running counts."""

    documents: list[str]
    index_of: dict[str, int]
    by_id: dict[str, dict]
    slots: list[list[int]]
    passages: dict[tuple[str, str], list[dict]] | None
    budget: int
    pairs: int = 0
    left_out: int = 0


def _clustered_documents(clusters: list[dict]) -> tuple[list[str], list[int]]:
    """Document ids cluster by cluster (keeper first, then the members as listed) and the
    position of each cluster's first document. O(members)."""
    documents: list[str] = []
    firsts = []
    for c in clusters:
        firsts.append(len(documents))
        documents.append(c["keeper"])
        documents.extend(m["document_id"] for m in c["members"] if m["document_id"] != c["keeper"])
    return documents, firsts


def _utf16_length(text: str) -> int:
    # The browser's string length: characters beyond U+FFFF count twice. ASCII is the common case.
    return len(text) if text.isascii() else len(text.encode("utf-16-le", "surrogatepass")) // 2


def _plan_texts(documents: list[str], texts: dict) -> tuple[list[list[str]], list[list[int]]]:
    """Texts cut to `MAX_TEXT_CHARS`, gathered in document order into blobs of about
    `TEXT_BLOB_CHARS` (a text is never split between blobs).

    Returns the pieces of each blob (`_interleave`) and, per document, ``[characters, cut,
    blob]``. O(text).
    """
    groups: list[tuple[int, list[str]]] = []
    slots = []
    size = 0
    for i, doc_id in enumerate(documents):
        full = texts.get(doc_id, "")
        text = full[:MAX_TEXT_CHARS]
        if not groups or (size and size + len(text) > TEXT_BLOB_CHARS):
            groups.append((i, []))
            size = 0
        groups[-1][1].append(text)
        size += len(text)
        slots.append([len(full), int(len(full) > MAX_TEXT_CHARS), len(groups) - 1])
    return [_interleave(first, group) for first, group in groups], slots


def _interleave(first: int, group: list[str]) -> list[str]:
    """One text blob: a JSON header line ``[first document, piece size, [[code points, UTF-16
    units of each piece or null when they equal the code points], ...]]``, then the texts cut
    in pieces of `TEXT_PIECE` code points and taken in rounds (the first piece of every text,
    then every second piece, ...).

    Why rounds: deflate finds repeats only within its last 32 KB, so a near-duplicate placed
    after a long text would be stored whole; in rounds, its pieces sit next to the pieces they
    repeat, and each copy costs little more than its differences (about half the size, on
    man pages with edited copies). Cost O(text) in slices of `TEXT_PIECE`.
    """
    layout = []
    for text in group:
        units = None
        if not text.isascii() and _utf16_length(text) != len(text):
            units = [_utf16_length(text[s : s + TEXT_PIECE]) for s in range(0, len(text), TEXT_PIECE)]
        layout.append([len(text), units])
    pieces = [json.dumps([first, TEXT_PIECE, layout], separators=(",", ":")) + "\n"]
    longest = max((len(text) for text in group), default=0)
    for start in range(0, longest, TEXT_PIECE):
        pieces.extend(text[start : start + TEXT_PIECE] for text in group if start < len(text))
    return pieces


def unpack_texts(packed: str) -> dict[int, str]:
    """The texts of one text blob by document index (what the page's script rebuilds)."""
    body = unpack_blob(packed)
    at = body.index("\n")
    first, piece, layout = json.loads(body[:at])
    units = body[at + 1 :].encode("utf-16-le", "surrogatepass")
    parts: list[list[str]] = [[] for _ in layout]
    pos, rounds = 0, max((n for n, _ in layout), default=0)
    for r in range(0, (rounds + piece - 1) // piece):
        for j, (n, sizes) in enumerate(layout):
            if r * piece < n:
                size = sizes[r] if sizes else min(piece, n - r * piece)
                parts[j].append(units[2 * pos : 2 * (pos + size)].decode("utf-16-le", "surrogatepass"))
                pos += size
    return {first + j: "".join(p) for j, p in enumerate(parts)}


def _passages_by_pair(passages: list[dict]) -> dict[tuple[str, str], list[dict]]:
    """The audit's passages grouped by their (left, right) pair, in their order. O(passages)."""
    grouped: dict[tuple[str, str], list[dict]] = {}
    for p in passages:
        grouped.setdefault((p["left"], p["right"]), []).append(p)
    return grouped


def _pairs_by_cluster(result, index_of: dict[str, int], firsts: list[int]) -> dict[int, list[dict]]:
    """The audit's pairs whose two documents share a cluster, by that cluster's first
    document. O(pairs + documents)."""
    home: dict[int, int] = {}
    for first, nxt in zip(firsts, firsts[1:] + [len(index_of)]):
        for i in range(first, nxt):
            home[i] = first
    grouped: dict[int, list[dict]] = {}
    for p in result.pairs:
        a, b = index_of.get(p["left"]), index_of.get(p["right"])
        if a is not None and b is not None and home[a] == home[b]:
            grouped.setdefault(home[a], []).append(p)
    return grouped


def _cluster_detail(c: dict, run: range, cluster_pairs: list[dict], ctx: _Context) -> tuple[dict, float]:
    """One cluster's details (layout in `report_data`) and its best pair score.

    Every member's pair with the keeper is embedded (the audit's record of it when there
    is one, else one made from the member's scores); the cluster's other pairs while
    ``ctx.budget`` lasts. O(members + pairs of the cluster + their passages).
    """
    first = run.start
    by_doc = {m["document_id"]: m for m in c["members"]}
    listed = {_key(ctx.index_of[p["left"]], ctx.index_of[p["right"]]): p for p in cluster_pairs}
    pairs: list[list] = []
    row_of: dict[tuple[int, int], int] = {}
    members = []
    for i in run:
        m = by_doc.get(ctx.documents[i]) or _keeper_member(c)
        pair = -1
        if i != first:
            record = listed.get(_key(i, first)) or _keeper_pair(m, c["keeper"])
            pair = _add_pair(pairs, row_of, ctx, record)
        members.append(_member_row(m, ctx, pair))
    for p in cluster_pairs:
        key = _key(ctx.index_of[p["left"]], ctx.index_of[p["right"]])
        if key in row_of:
            continue
        if ctx.budget <= 0:
            ctx.left_out += 1
            continue
        ctx.budget -= 1
        _add_pair(pairs, row_of, ctx, p)
    scores = [p["deciding_score"] for p in cluster_pairs] + [
        1.0 if m[5] is None else m[5] for m in members[1:]
    ]
    docs = [_doc_row(ctx, i) for i in run]
    return {"members": members, "docs": docs, "pairs": pairs}, max(scores, default=1.0)


def _compact(detail: dict) -> str:
    return json.dumps(detail, ensure_ascii=False, separators=(",", ":"), allow_nan=False)


def _key(a: int, b: int) -> tuple[int, int]:
    return (a, b) if a < b else (b, a)


def _keeper_member(c: dict) -> dict:
    # A keeper missing from its member list (never made by the audit) still gets a row.
    return {"role": "keeper", "similarity_to_keeper": None, "deciding_score": None,
            "linked_through": None, "action": "keep", "reason": "", "document_id": c["keeper"]}  # fmt: skip


def _keeper_pair(m: dict, keeper: str) -> dict:
    """A member's pair with its keeper when the audit lists none (it was scored against the
    keeper all the same): oriented (member, keeper), as the passage stage orients it."""
    return {
        "left": m["document_id"],
        "right": keeper,
        "kind": "exact" if m["role"] == "exact-copy" else "near",
        "deciding_score": m["deciding_score"],
    }


def _add_pair(pairs: list[list], row_of: dict, ctx: _Context, p: dict) -> int:
    """Append one pair row (layout in `report_data`), oriented as its passages are; its row."""
    a_id, b_id = p["left"], p["right"]
    a_cov, b_cov = p.get("left_covered"), p.get("right_covered")
    left_out = p.get("templates_left_out")
    flat = None
    if ctx.passages is not None:
        found = ctx.passages.get((a_id, b_id))
        if found is None and (b_id, a_id) in ctx.passages:
            a_id, b_id, a_cov, b_cov = b_id, a_id, b_cov, a_cov
            left_out = _SWAPPED.get(left_out, left_out)
            found = ctx.passages[(a_id, b_id)]
    a, b = ctx.index_of[a_id], ctx.index_of[b_id]
    if ctx.passages is not None:
        flat = _flat_passages(found or [], _cut_length(ctx.slots[a]), _cut_length(ctx.slots[b]))
    row_of[_key(a, b)] = len(pairs)
    whole = _score(p.get("whole_text_jaccard"))
    pairs.append(
        [a, b, p["kind"], _score(p["deciding_score"]), _share(a_cov), _share(b_cov), flat, whole, left_out]
    )
    ctx.pairs += 1
    return len(pairs) - 1


# ``templates_left_out`` seen from the other side of the pair.
_SWAPPED = {"left": "right", "right": "left"}


def _cut_length(slot: list[int]) -> int:
    return min(slot[0], MAX_TEXT_CHARS)


def _share(x: float | None) -> float | None:
    return None if x is None else round(float(x), 4)


def _score(x: float | None) -> float | None:
    # Six decimals: the page shows three; the full repr would only add bytes.
    return None if x is None else round(float(x), 6)


def _flat_passages(found: list[dict], limit_a: int, limit_b: int) -> list[int]:
    """`PASSAGE_FIELDS` of each passage, one flat list: what lies beyond a cut text is cut
    too (a passage starting there is left out). O(passages)."""
    flat: list[int] = []
    for p in found:
        a0, b0 = int(p["left_start"]), int(p["right_start"])
        if a0 >= limit_a or b0 >= limit_b:
            continue
        flat += (
            a0,
            min(int(p["left_end"]), limit_a),
            b0,
            min(int(p["right_end"]), limit_b),
            int(p["words"]),
            round(float(p["similarity"]) * 1000),
            int(bool(p["moved"])),
        )
    return flat


def _member_row(m: dict, ctx: _Context, pair: int) -> list:
    sim = m["similarity_to_keeper"] or {}
    linked = ctx.index_of.get(m["linked_through"], -1) if m["linked_through"] else -1
    scores = [_score(x) for x in (sim.get("jaccard"), sim.get("containment_in_keeper"),
                                  sim.get("keeper_containment"), sim.get("cosine"), m["deciding_score"])]  # fmt: skip
    return [m["role"], *scores, linked, m["action"], m["reason"], pair]


def _doc_row(ctx: _Context, i: int) -> list:
    d = ctx.by_id.get(ctx.documents[i], {})
    return [d.get("bytes", 0), d.get("content_hash", ""), *ctx.slots[i]]


def _group(details: list[str], rows: list[list], first_blob: int) -> list[list[str]]:
    """Cluster details (JSON texts) gathered into blobs of about `BLOB_CHARS`; each cluster
    row gets its ``blob, slot``. Each blob is the pieces of one JSON list. O(details)."""
    groups: list[list[str]] = []
    size = 0
    for text, row in zip(details, rows):
        if not groups or (size and size + len(text) > BLOB_CHARS):
            groups.append([])
            size = 0
        row += [first_blob + len(groups) - 1, len(groups[-1])]
        groups[-1].append(text)
        size += len(text)
    return [["[", ",".join(g), "]"] for g in groups]


def _pack(pieces: list[str]) -> str:
    # A lone surrogate (undecodable input kept by the reader) becomes "?": one code point for one.
    raw = "".join(pieces).encode("utf-8", "replace")
    return base64.b64encode(zlib.compress(raw, COMPRESS_LEVEL)).decode("ascii")


def _pack_all(parts: list[list[str]]) -> list[str]:
    """Every blob packed (zlib, then base64), in order; in threads, as zlib releases the GIL.
    Deterministic: the same pieces give the same bytes."""
    workers = min(4, os.cpu_count() or 1)
    if workers < 2 or len(parts) < 2:
        return [_pack(p) for p in parts]
    with ThreadPoolExecutor(workers) as pool:
        return list(pool.map(_pack, parts))


def unpack_blob(packed: str) -> str:
    """The text of one blob of `report_data` (what the page's script inflates)."""
    return zlib.decompress(base64.b64decode(packed)).decode("utf-8")


def csp_hash(script: str) -> str:
    """The Content-Security-Policy source that allows exactly this inline script or style."""
    return "sha256-" + base64.b64encode(hashlib.sha256(script.encode("utf-8")).digest()).decode()


def render_html(result) -> str:
    """The report for an `AuditResult` as an HTML string."""
    return "".join(iter_html(result))


# Stand for the data block and the packed blobs while the page around them is rendered. Each
# holds a "<", which autoescaping turns into "&lt;" in any text the page shows, so no document,
# path or setting can hold a mark (the page is split on them, exactly once each).
_DATA_MARK = "<dedup-audit-data/>"
_BLOBS_MARK = "<dedup-audit-blobs/>"


def iter_html(result, progress=None) -> Iterator[str]:
    """The report in pieces, for writing without holding the page twice (it can be large)."""
    env = template_environment()
    folder = template_folder()
    with open(os.path.join(folder, "report.js"), encoding="utf-8") as handle:
        script = handle.read()
    with open(os.path.join(folder, "report.css"), encoding="utf-8") as handle:
        style = handle.read()
    near_scores = [p["deciding_score"] for p in result.pairs if p["kind"] == "near"]
    recall = result.candidates["expected_recall"]
    chart_svgs = [
        charts.similarity_histogram(near_scores, result.settings.threshold, result.settings.measure),
        charts.cluster_sizes([c["size"] for c in result.clusters]),
    ]
    if result.candidates.get("method") == "lsh":  # an exact search misses no pair: no catch curve
        chart_svgs.insert(
            1, charts.s_curve(recall["bands"], recall["rows"], result.candidates["lsh_threshold"])
        )
    data = report_data(result, progress)
    blobs = data.pop("blobs")
    data["blob_count"] = len(blobs)
    page = env.get_template("report.html.j2").render(
        result=result,
        settings=result.settings.to_dict(),
        version=__version__,
        generated=result.run.get("started", ""),
        charts=chart_svgs,
        data_json=_DATA_MARK,
        blobs=_BLOBS_MARK,
        script=script,
        style=style,
        script_hash=csp_hash(script),
        style_hash=csp_hash(style),
    )
    if page.count(_DATA_MARK) != 1 or page.count(_BLOBS_MARK) != 1:
        raise RuntimeError("report template: the data marks must each appear once")
    before, rest = page.split(_DATA_MARK)
    middle, after = rest.split(_BLOBS_MARK)
    yield before
    yield from iter_embed_json(data)
    yield middle
    for n, packed in enumerate(blobs):
        # Base64 holds no "<", so nothing in it can end the element.
        yield f'<script type="application/octet-stream" id="blob-{n}">{packed}</script>\n'
    yield after

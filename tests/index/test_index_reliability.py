"""Reliability: an update killed with SIGKILL leaves a whole index; readers work while an update writes."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest
from index_helpers import copy_index, edited, sqlite

import dedup
from dedup.index import build, open_index, similar, track_audit, update

ROOT = Path(__file__).resolve().parents[2]

# Runs an update and, at a chosen point inside its transaction, kills itself with SIGKILL or waits
# for a flag file. A progress object is told every stage and every document, from inside the write.
CHILD = r"""
import os, signal, sys, time
from dedup.index import update
from dedup.progress import Progress

root, index, stage_wanted, event, at, flags = sys.argv[1], sys.argv[2], sys.argv[3], sys.argv[4], int(sys.argv[5]), sys.argv[6]

class Stop(Progress):
    def __init__(self):
        self.stage, self.count = "", 0

    def _maybe(self, event_now):
        if self.stage != stage_wanted or event_now != event or (event_now == "advance" and self.count != at):
            return
        if flags == "kill":
            os.kill(os.getpid(), signal.SIGKILL)
        open(os.path.join(flags, "paused"), "w").close()
        deadline = time.monotonic() + 60
        while not os.path.exists(os.path.join(flags, "go")) and time.monotonic() < deadline:
            time.sleep(0.02)

    def start(self, stage, total=None):
        self.stage, self.count = stage, 0
        self._maybe("start")

    def advance(self, n=1):
        self.count += n
        self._maybe("advance")

    def done(self, note=""):
        self._maybe("done")

update([root], index, progress=Stop())
print("committed")
"""


def _child(root, index, stage, event, at, flags) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-c", CHILD, str(root), str(index), stage, event, str(at), str(flags)],
        cwd=ROOT,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )


def _state(path) -> tuple:
    """Everything an update changes, as plain values."""
    with sqlite(path) as connection:
        return (
            sorted(connection.execute("SELECT doc_id, content_hash, status FROM documents")),
            sorted(r[0] for r in connection.execute("SELECT content_hash FROM texts")),
            connection.execute("SELECT count(*) FROM sketches").fetchone(),
            connection.execute("SELECT texts, entries, segments, run, norms FROM tfidf").fetchone(),
            connection.execute("SELECT count(*), coalesce(sum(df), 0) FROM postings").fetchone(),
            connection.execute("SELECT count(*) FROM runs").fetchone(),
        )


def _check_whole(path) -> None:
    """Reference: SQLite's PRAGMA integrity_check."""
    with sqlite(path) as connection:
        assert connection.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
    with open_index(str(path)) as index:
        similar(index, "words to look for")


@pytest.fixture
def pending(tmp_path, write_corpus, corpus_files, base_texts):
    """An index, the corpus changed since, and the state the update must reach."""
    root = write_corpus(corpus_files)
    index = tmp_path / "r.index"
    build([str(root)], str(index))
    (root / "lone/3.txt").write_text(base_texts[9], encoding="utf-8")
    (root / "lone/new.txt").write_text(base_texts[10], encoding="utf-8")
    (root / "c/three.txt").write_text(edited(base_texts[2], "otter"), encoding="utf-8")
    (root / "lone/4.txt").unlink()
    before = _state(index)
    reference = tmp_path / "reference.index"
    copy_index(index, reference)
    update([str(root)], str(reference))
    after = _state(reference)
    assert before != after
    return root, index, before, after


@pytest.mark.parametrize(
    ("stage", "event", "at"),
    [("reading", "advance", 4), ("statistics", "start", 0), ("statistics", "done", 0)],
)
def test_sigkill_inside_an_update_leaves_the_index_as_it_was(pending, stage, event, at):
    root, index, before, after = pending
    child = _child(root, index, stage, event, at, "kill")
    _, err = child.communicate(timeout=120)
    assert child.returncode == -signal.SIGKILL, err
    _check_whole(index)
    assert _state(index) == before
    update([str(root)], str(index))  # the next update completes the work
    assert _state(index)[:3] == after[:3]


def _wait_paused(child, flags) -> None:
    deadline = time.monotonic() + 120
    while not (flags / "paused").exists():
        if child.poll() is not None or time.monotonic() > deadline:
            raise AssertionError(f"the update did not reach its pause: {child.communicate()[1]}")
        time.sleep(0.02)


@pytest.mark.parametrize(("stage", "event", "at"), [("reading", "advance", 8), ("sketching", "done", 0)])
def test_sigkill_from_outside_while_the_update_writes(pending, tmp_path, stage, event, at):
    root, index, before, _ = pending
    flags = tmp_path / "flags"
    flags.mkdir()
    child = _child(root, index, stage, event, at, flags)
    _wait_paused(child, flags)
    child.send_signal(signal.SIGKILL)
    child.communicate(timeout=120)
    assert child.returncode == -signal.SIGKILL
    _check_whole(index)
    assert _state(index) == before


def test_sigkill_at_any_moment_leaves_either_state(pending):
    """Kills at growing delays, from before the update starts until it has committed."""
    root, index, before, after = pending
    delay = 0.15
    while True:  # no attempt limit a loaded machine could run out of: the delay grows until the update ends
        child = _child(root, index, "none", "none", 0, "kill")
        try:
            child.wait(timeout=delay)  # the update ended before the kill
        except subprocess.TimeoutExpired:
            child.send_signal(signal.SIGKILL)
        _, err = child.communicate(timeout=120)
        _check_whole(index)
        state = _state(index)
        assert state == before or state[:3] == after[:3]
        if state != before:
            break
        assert child.returncode == -signal.SIGKILL, f"the update ended without committing: {err}"
        delay += 0.15
    assert state[:3] == after[:3]


def test_readers_work_while_an_update_writes(pending, tmp_path, base_texts):
    root, index, before, _ = pending
    flags = tmp_path / "flags"
    flags.mkdir()
    child = _child(root, index, "statistics", "done", 0, flags)
    try:
        _wait_paused(child, flags)
        # The update has written everything and holds the write lock, uncommitted.
        started = time.monotonic()
        with open_index(str(index)) as reader:
            results = similar(reader, base_texts[10], k=1)
        assert time.monotonic() - started < 10
        assert not results or results[0]["document_id"] != "lone/new.txt"  # the update is not visible yet
        assert _state(index) == before

        audit = dedup.audit([str(root)])
        recorded: dict = {}
        thread = threading.Thread(target=lambda: recorded.update(delta=track_audit(str(index), audit)[0]))
        thread.start()
        time.sleep(0.5)
        assert thread.is_alive()  # recording the audit waits for the writer
        (flags / "go").touch()
        out, err = child.communicate(timeout=120)
        assert "committed" in out, err
        thread.join(timeout=120)
        assert not thread.is_alive() and recorded["delta"]["previous"] is None
    finally:
        if child.poll() is None:
            child.kill()
            child.communicate()
    with open_index(str(index)) as reader:
        assert similar(reader, base_texts[10], k=1)[0]["document_id"] == "lone/new.txt"
    _check_whole(index)
    assert not os.path.exists(str(index) + "-journal")

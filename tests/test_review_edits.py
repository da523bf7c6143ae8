"""Review edits: validation, replay onto boundaries, undo/redo, apply_review, and the review file."""
import json
import os
import threading

import numpy as np
import pytest

from bandgeo.errors import ReviewError
from bandgeo.review import ReviewSession, apply_review, read_review, save_review, validate_edit
from bandgeo.review.edits import replay

from test_review_support import make_folder

BASE = [(0, 1.0), (1, 2.5), (2, 4.0), (3, 5.5)]
SPAN = (0.0, 7.0)


@pytest.mark.parametrize("edit", [
    {"op": "reject", "id": 3},
    {"op": "move", "id": 1, "height_mm": 2.25},
    {"op": "add", "height_mm": 3},
    {"op": "hiatus", "s0_mm": 1.0, "s1_mm": 2.0, "note": "recrystallised patch"},
    {"op": "note", "text": "  fracture at 3 mm  ", "id": 2},
])
def test_valid_edits_are_normalised(edit):
    out = validate_edit(edit)
    assert out["op"] == edit["op"]
    for key in ("height_mm", "s0_mm", "s1_mm"):
        if key in edit:
            assert isinstance(out[key], float)
    if "text" in edit:
        assert out["text"] == edit["text"].strip()


@pytest.mark.parametrize("edit, words", [
    ([1, 2], "JSON object"),
    ({"op": "erase", "id": 1}, "unknown edit op"),
    ({"op": "reject"}, "missing"),
    ({"op": "reject", "id": True}, "whole number"),
    ({"op": "reject", "id": -1}, "whole number"),
    ({"op": "move", "id": 1, "height_mm": float("nan")}, "finite"),
    ({"op": "move", "id": 1, "height_mm": "3"}, "finite"),
    ({"op": "hiatus", "s0_mm": 2.0, "s1_mm": 1.0}, "s0_mm < s1_mm"),
    ({"op": "reject", "id": 1, "path": "/etc/passwd"}, "unexpected field"),
    ({"op": "note", "text": "x" * 5000}, "characters"),
    ({"op": "note", "text": "   "}, "empty"),
    ({"op": "reject", "id": 1, "time_utc": "yesterday"}, "time_utc"),
])
def test_malformed_edits_get_one_line_errors(edit, words):
    with pytest.raises(ReviewError) as info:
        validate_edit(edit)
    message = str(info.value)
    assert words in message and "\n" not in message


def test_replay_reject_accept_add_move_merge():
    # Expected outcomes worked out by hand from the edit definitions in docs/review-file.md.
    state = replay(BASE, [{"op": "reject", "id": 1}, {"op": "accept", "id": 1},
                          {"op": "merge", "id": 2}, {"op": "add", "height_mm": 6.5},
                          {"op": "move", "id": 3, "height_mm": 5.0}], SPAN)
    active = state.active()
    assert [b.id for b in active] == [0, 1, 3, 4]          # the added boundary gets the next free id
    assert [b.height_mm for b in active] == [1.0, 2.5, 5.0, 6.5]
    assert {b.id: b.status for b in state.boundaries.values()} == {
        0: "auto", 1: "accepted", 2: "merged", 3: "moved", 4: "added"}


@pytest.mark.parametrize("edits, words", [
    ([{"op": "reject", "id": 17}], "no boundary 17"),
    ([{"op": "reject", "id": 1}, {"op": "move", "id": 1, "height_mm": 3.0}], "already removed"),
    ([{"op": "add", "height_mm": 2.5}], "on boundary 1"),
    ([{"op": "add", "height_mm": 9.0}], "outside the growth axis"),
    ([{"op": "add", "height_mm": 3.0, "id": 2}], "already used"),
    ([{"op": "unmark", "mark": 0}], "no mark 0"),
])
def test_replay_refuses_edits_that_do_not_fit(edits, words):
    with pytest.raises(ReviewError, match=words):
        replay(BASE, edits, SPAN)


def test_session_undo_redo_and_failed_edit_changes_nothing():
    session = ReviewSession(BASE, SPAN)
    session.push({"op": "reject", "id": 0})
    added = session.push({"op": "add", "height_mm": 3.0})
    assert added["id"] == 4 and "time_utc" in added
    before = session.edits
    with pytest.raises(ReviewError):
        session.push({"op": "move", "id": 99, "height_mm": 3.3})
    assert session.edits == before
    assert session.undo() and [b.id for b in session.state.active()] == [1, 2, 3]
    assert session.redo() and [b.id for b in session.state.active()] == [1, 4, 2, 3]
    session.push({"op": "move", "id": 2, "height_mm": 4.1, "coalesce": True})
    session.push({"op": "move", "id": 2, "height_mm": 4.2, "coalesce": True})
    assert len(session.edits) == 3                          # a run of key presses is one edit
    assert not session.can_redo()
    session.undo()
    assert session.state.boundaries[2].height_mm == 4.0
    session.undo(), session.undo()
    assert not session.undo() and session.edits == []


def test_apply_review_on_fixture_segmentation(tmp_path):
    folder, seg, specimen = make_folder(tmp_path / "KRB-12", n_bounds=8, spacing=1.5)
    heights = [b.height_mm for b in seg.boundaries]
    review = {"edits": [{"op": "reject", "id": 3}, {"op": "accept", "id": 5},
                        {"op": "add", "height_mm": 2.0},
                        {"op": "hiatus", "s0_mm": 6.0, "s1_mm": 7.0, "note": "no laminae"}]}
    edited = apply_review(seg, specimen, review)
    assert seg.boundaries[3].height_mm == heights[3]        # the input is not modified
    ids = [b.id for b in edited.boundaries]
    assert 3 not in ids and 8 in ids and len(ids) == 8
    added = next(b for b in edited.boundaries if b.id == 8)
    assert added.origin == "review" and added.height_mm == 2.0
    assert next(b for b in edited.boundaries if b.id == 5).confidence == 1.0
    # Merging two bands of 1.5 mm gives one of 3.0 mm: the vertices between boundaries 2 and 4 now
    # share one band label (analytic: the labels follow the boundary heights).
    z = specimen.vertices_mm[:, 2]
    inside = (z > heights[2] + 0.05) & (z < heights[4] - 0.05)
    assert np.unique(edited.vertex_band[inside]).size == 1
    assert edited.resolution["review_marks"] == [[6.0, 7.0, "hiatus: no laminae"]]
    assert edited.params["review"]["edits"] == 4
    assert apply_review(seg, specimen, None) is seg
    with pytest.raises(ReviewError, match="does not fit"):
        apply_review(seg, specimen, {"edits": [{"op": "reject", "id": 42}]})


def test_read_review_missing_malformed_and_linked(tmp_path):
    assert read_review(tmp_path) is None
    (tmp_path / "review.json").write_text('{"edits": [}', encoding="utf-8")
    with pytest.raises(ReviewError, match="not valid JSON") as info:
        read_review(tmp_path)
    assert "\n" not in str(info.value)
    (tmp_path / "review.json").write_text('{"schema": "other/9", "edits": []}', encoding="utf-8")
    with pytest.raises(ReviewError, match="schema"):
        read_review(tmp_path)
    (tmp_path / "review.json").write_text('{"edits": [{"op": "reject"}]}', encoding="utf-8")
    with pytest.raises(ReviewError, match="edit 1"):
        read_review(tmp_path)
    outside = tmp_path.parent / f"{tmp_path.name}-outside.json"
    outside.write_text('{"edits": []}', encoding="utf-8")
    (tmp_path / "review.json").unlink()
    os.symlink(outside, tmp_path / "review.json")
    with pytest.raises(ReviewError, match="outside the specimen folder"):
        read_review(tmp_path)
    with pytest.raises(ReviewError, match="outside the specimen folder"):
        save_review(tmp_path, {"edits": []})
    assert outside.read_text(encoding="utf-8") == '{"edits": []}'


def test_save_keeps_history_and_survives_a_crash(tmp_path, monkeypatch):
    first = save_review(tmp_path, {"edits": [{"op": "reject", "id": 1, "time_utc": "2026-12-02T01:00:00Z"}]})
    assert first["history"][0]["edits_after"] == 1 and first["created_utc"] == first["updated_utc"]
    text = (tmp_path / "review.json").read_text(encoding="utf-8")

    def crash(src, dst):
        raise OSError("simulated power cut")

    monkeypatch.setattr(os, "replace", crash)
    with pytest.raises(OSError):
        save_review(tmp_path, {"edits": []})
    monkeypatch.undo()
    # The previous file is intact and no temporary file is left behind (bandgeo.atomic contract).
    assert (tmp_path / "review.json").read_text(encoding="utf-8") == text
    assert sorted(p.name for p in tmp_path.iterdir()) == ["review.json"]
    second = save_review(tmp_path, {"edits": []})
    assert second["history"][-1]["removed"][0]["id"] == 1 and len(second["history"]) == 2


def test_concurrent_saves_cannot_corrupt_the_file(tmp_path):
    n_threads, n_saves = 8, 12
    errors = []

    def hammer(k):
        try:
            for i in range(n_saves):
                edits = [{"op": "note", "text": f"thread {k} save {i} item {j}"} for j in range(i % 4 + 1)]
                save_review(tmp_path, {"edits": edits})
        except Exception as exc:  # pragma: no cover - reported below
            errors.append(exc)

    threads = [threading.Thread(target=hammer, args=(k,)) for k in range(n_threads)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    review = json.loads((tmp_path / "review.json").read_text(encoding="utf-8"))
    history = review["history"]
    assert len(history) == n_threads * n_saves
    # A consistent history: each save starts from what the previous one left, and replaying the
    # added/removed lists from nothing gives the edits in the file.
    assert history[0]["edits_before"] == 0
    assert all(a["edits_after"] == b["edits_before"] for a, b in zip(history, history[1:]))
    held = []
    for entry in history:
        held = [e for e in held if e not in entry["removed"]] + entry["added"]
    assert sorted(map(json.dumps, held)) == sorted(map(json.dumps, review["edits"]))
    assert len(review["edits"]) == history[-1]["edits_after"]


def test_apply_review_with_the_real_segmentation(tmp_path):
    import bandgeo.segment as segment
    from test_review_support import make_real_folder

    folder, seg, specimen = make_real_folder(tmp_path / "KRB-31", n_bounds=6, spacing=2.0)
    loaded = segment.Segmentation.load(folder)
    review = {"edits": [{"op": "merge", "id": 2}, {"op": "split", "height_mm": 8.0},
                        {"op": "move", "id": 4, "height_mm": 9.5}]}
    edited = apply_review(loaded, specimen, review)
    assert [b.id for b in edited.boundaries] == [0, 1, 3, 6, 4, 5]
    assert [b.origin for b in edited.boundaries] == ["auto", "auto", "auto", "review", "review", "auto"]
    # Analytic: on a straight vertical axis the band of a wall vertex is fixed by its z alone.
    z = specimen.vertices_mm[:, 2]
    heights = np.array([b.height_mm for b in edited.boundaries])
    expected = np.searchsorted(heights, z, side="right") - 1
    expected[(expected < 0) | (expected >= len(heights) - 1)] = -1
    far = np.min(np.abs(z[:, None] - heights[None, :]), axis=1) > 0.05
    assert np.array_equal(edited.vertex_band[far], expected[far].astype(np.int32))
    assert edited.resolution["flagged"] == [] and "review" in edited.params


def test_accept_stretch_confirms_the_automatic_boundaries_in_place_in_one_undo_step(tmp_path):
    # Worked out by hand: boundaries at 1.0, 2.5, 4.0, 5.5 mm; boundary 1 removed and one added at 3.0
    # before the stretch 2.0-4.5 mm is confirmed -> only boundary 2 (4.0 mm) is an automatic one in place.
    session = ReviewSession(BASE, SPAN)
    session.push({"op": "reject", "id": 1})
    session.push({"op": "add", "height_mm": 3.0})
    session.push({"op": "accept_stretch", "s0_mm": 2.0, "s1_mm": 4.5})
    status = {b.id: b.status for b in session.state.boundaries.values()}
    assert status == {0: "auto", 1: "rejected", 2: "accepted", 3: "auto", 4: "added"}
    assert session.undo() and session.state.boundaries[2].status == "auto"
    with pytest.raises(ReviewError, match="no boundary in place"):
        session.push({"op": "accept_stretch", "s0_mm": 6.0, "s1_mm": 6.9})
    # In the pipeline's replay the confirmed boundaries get confidence 1.0, the others keep theirs.
    folder, seg, specimen = make_folder(tmp_path / "KRB-12", n_bounds=8, spacing=1.5)
    edited = apply_review(seg, specimen, {"edits": [{"op": "accept_stretch", "s0_mm": 3.0, "s1_mm": 7.0}]})
    conf = {b.id: b.confidence for b in edited.boundaries}
    inside = [b.id for b in seg.boundaries if 3.0 <= b.height_mm <= 7.0]
    assert inside == [2, 3, 4] and all(conf[i] == 1.0 for i in inside)
    assert all(conf[b.id] == b.confidence for b in seg.boundaries if b.id not in inside)


def test_segmentation_id_and_fit_of_a_review(tmp_path):
    from bandgeo.review.basis import check_fit, check_review, segmentation_id

    folder, seg, specimen = make_folder(tmp_path / "KRB-12", n_bounds=8, spacing=1.5)
    sid = segmentation_id(seg)
    assert sid == segmentation_id(seg) and sid.startswith("seg-") and len(sid) == 20
    moved = type(seg)(**{**seg.__dict__, "boundaries": [
        type(b)(**{**b.__dict__, "height_mm": b.height_mm + 1e-3}) if b.id == 3 else b for b in seg.boundaries]})
    assert segmentation_id(moved) != sid                       # one boundary 1 micrometre away: another id
    specimen.scan_sha256, specimen.units, specimen.mm_per_unit = "0" * 64, "mm", 1.0
    specimen.scan_to_specimen = np.eye(4)
    basis = {"scan_sha256": "0" * 64, "units": "mm", "mm_per_unit": 1.0, "scan_to_specimen": np.eye(4).tolist(),
             "segmentation_id": sid, "n_boundaries": 8}
    assert check_review({"basis": basis}, specimen, seg) == []
    assert check_review({"basis": basis}, specimen, moved) != []
    scaled = dict(basis, units="cm", mm_per_unit=10.0, scan_to_specimen=(np.eye(4) * [10, 10, 10, 1]).tolist())
    assert any("units cm" in r for r in check_review({"basis": scaled}, specimen, seg))
    turned = dict(basis, scan_to_specimen=[[0, -1, 0, 0], [1, 0, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]])
    assert any("frame" in r for r in check_review({"basis": turned}, specimen, seg))
    assert check_fit({"scan_sha256": "0" * 64}, dict(basis)) == []          # older file, same scan
    assert check_fit({}, dict(basis)) != []                                 # nothing recorded at all

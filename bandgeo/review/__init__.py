"""Review and correct an automatic segmentation: the review file, its edits, and a local web page.

    read_review(folder) -> dict | None          review.json of an analysed folder (None if none yet)
    save_review(folder, review) -> dict         atomic save, one writer at a time, with a history
    validate_edit(edit) -> dict                 check one edit's form
    apply_review(segmentation, specimen, review) -> Segmentation   replay the edits
    serve(folder, host="127.0.0.1", port=0, open_browser=True, token=None) -> server
    run(folder, ...)                            serve until Ctrl-C

The file format is described in docs/review-file.md. The web server is imported only when used.
"""
from .apply import apply_review
from .edits import ReviewSession, validate_edit
from .store import read_review, save_review

__all__ = ["read_review", "save_review", "validate_edit", "apply_review", "ReviewSession", "serve", "run"]


def serve(folder, host="127.0.0.1", port=0, open_browser=True, token=None, **kwargs):
    """Start the review server in a background thread; see ``bandgeo.review.server.serve``."""
    from .server import serve as _serve

    return _serve(folder, host=host, port=port, open_browser=open_browser, token=token, **kwargs)


def run(folder, **kwargs):
    """Serve the review page until Ctrl-C; see ``bandgeo.review.server.run``."""
    from .server import run as _run

    return _run(folder, **kwargs)

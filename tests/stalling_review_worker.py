"""A review re-run worker whose saves never finish (``python -m stalling_review_worker``, with this
folder on PYTHONPATH): it loads the folder like the real worker, says ``ready``, and on a
save request sends one progress line and then waits until it is killed. Used by
tests/test_review_rerun.py to kill a worker in the middle of a save deterministically (a real save may
finish before the test hears its first progress line on a loaded machine)."""
import threading

from bandgeo import pipeline
from bandgeo.review import worker


class _Stalling(pipeline.Rerunner):
    def warm(self, *args, **kwargs):  # nothing to prepare: no save of this worker ever finishes
        pass

    def __call__(self, *args, progress=None, **kwargs):
        if progress is not None:
            progress("review", 0, 1)
        threading.Event().wait()  # until the test kills this process


if __name__ == "__main__":
    pipeline.Rerunner = _Stalling
    raise SystemExit(worker.main())

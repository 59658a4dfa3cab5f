"""The recordings the bench baselines read: every *.h5 file under a folder,
in sorted order, hidden files and folders left out (as muarc's batch
commands find them)."""
import os


def recordings(root):
    """Yields the path of every *.h5 file under root, sorted by folder."""
    for dirpath, dirnames, filenames in os.walk(root):
        dirnames[:] = sorted(d for d in dirnames if not d.startswith("."))
        for name in sorted(filenames):
            if name.endswith(".h5") and not name.startswith("."):
                yield os.path.join(dirpath, name)

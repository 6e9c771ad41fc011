"""The resumable sample store under damage and contention (issue 8, class 8).

References outside the code under test: numpy's own ``np.savez``/``np.load`` (a batch file
cut short is not a readable zip archive, Python's ``zipfile`` says so) and POSIX
``flock`` semantics (two open file descriptions of one file cannot both hold LOCK_EX).
"""

from __future__ import annotations

import numpy as np
import pytest

from ionochem.analysis.ensemble_store import EnsembleStore
from ionochem.errors import InputError

MANIFEST = {"method": "montecarlo", "seed": 1, "samples": 10}


def _store_with_two_batches(folder):
    store = EnsembleStore(folder, MANIFEST)
    rng = np.random.default_rng(0)
    for a, b in ((0, 5), (5, 10)):
        store.write(a, b, rng.normal(size=(5, 3)), rng.random((5, 4, 2)))
    store.close()
    return folder


def test_truncated_batch_is_set_aside_and_counted_missing(tmp_path):
    """A batch file cut in half is renamed *.damaged on resume and its samples are missing
    again, so the run recomputes exactly that batch."""
    folder = _store_with_two_batches(tmp_path / "out.nc.samples")
    victim = folder / "batch_000000005_000000010.npz"
    data = victim.read_bytes()
    victim.write_bytes(data[: len(data) // 2])
    store = EnsembleStore(folder, MANIFEST, resume=True)
    assert store.discarded == [victim.name]
    assert store.finished() == [(0, 5)]
    assert store.missing(10) == [(5, 10)]
    assert (folder / (victim.name + ".damaged")).exists()
    z, n = store.read(0, 5)
    assert z.shape == (5, 3) and n.shape == (5, 4, 2)
    store.close()


def test_folder_without_manifest_is_not_taken_for_a_store(tmp_path):
    """A folder holding files but no manifest.json is refused with a message saying it is
    not a sample store (not 'pass --resume'), with or without --resume."""
    folder = tmp_path / "out.nc.samples"
    folder.mkdir()
    (folder / "notes.txt").write_text("my own files (invented)")
    for resume in (False, True):
        with pytest.raises(InputError) as info:
            EnsembleStore(folder, MANIFEST, resume=resume)
        assert "no manifest.json" in info.value.message
        assert "not an ionochem sample store" in info.value.message
        assert info.value.file == str(folder)


def test_empty_folder_left_by_a_killed_run_is_taken_over(tmp_path):
    """An empty store folder (a run killed between mkdir and the manifest) is reused."""
    folder = tmp_path / "out.nc.samples"
    folder.mkdir()
    store = EnsembleStore(folder, MANIFEST)
    assert (folder / "manifest.json").is_file()
    store.close()


def test_a_path_that_is_a_file_is_refused(tmp_path):
    """OUT.nc.samples existing as a plain file is an InputError, not NotADirectoryError."""
    path = tmp_path / "out.nc.samples"
    path.write_text("x")
    with pytest.raises(InputError) as info:
        EnsembleStore(path, MANIFEST)
    assert "not a folder" in info.value.message


def test_second_run_on_one_store_is_locked_out(tmp_path):
    """While one store object holds the lock, a second (a second run) is refused clearly;
    after the first closes, the second can resume."""
    folder = tmp_path / "out.nc.samples"
    first = EnsembleStore(folder, MANIFEST)
    with pytest.raises(InputError) as info:
        EnsembleStore(folder, MANIFEST, resume=True)
    assert "another ionochem run is using this sample store" in info.value.message
    first.close()
    second = EnsembleStore(folder, MANIFEST, resume=True)
    second.close()


def test_temporaries_of_a_killed_run_are_swept_on_resume(tmp_path):
    """A half-written batch left by SIGKILL (a hidden .tmp file) is removed when the next
    run opens the store under its lock; finished batches stay."""
    folder = _store_with_two_batches(tmp_path / "out.nc.samples")
    stray = folder / ".batch_000000010_000000015.npz.abcd1234.tmp"
    stray.write_bytes(b"PK\x03\x04 half")
    store = EnsembleStore(folder, MANIFEST, resume=True)
    assert not stray.exists()
    assert store.finished() == [(0, 5), (5, 10)]
    store.close()

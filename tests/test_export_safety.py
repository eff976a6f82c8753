"""Every export writes through a temporary file and an atomic rename: a missing or read-only folder gives a
clear OpenCodeError, and a failure half-way leaves no partial file and no temporary leftovers."""

import os

import pytest

from opencode.errors import OpenCodeError, WriteFailed
from opencode.export.spss_stata import write_dta, write_sav
from opencode.export.tabular import write_csv, write_xlsx
from opencode.export.triple_s import write_triple_s
from helpers import small_dataset

WRITERS = {
    "csv": (write_csv, "out.csv"),
    "xlsx": (write_xlsx, "out.xlsx"),
    "sav": (write_sav, "out.sav"),
    "dta": (write_dta, "out.dta"),
    "sss": (write_triple_s, "out.sss"),
}


@pytest.mark.parametrize("kind", sorted(WRITERS))
def test_missing_folder_is_a_clear_error(tmp_path, kind):
    writer, name = WRITERS[kind]
    target = tmp_path / "no-such-folder" / name
    with pytest.raises(OpenCodeError, match="no-such-folder does not exist"):
        writer(small_dataset(), target)
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("kind", sorted(WRITERS))
def test_read_only_folder_is_a_clear_error(locked_folder, kind):
    # Runs under root too: the locked_folder fixture simulates the kernel's refusal there (see conftest.py).
    writer, name = WRITERS[kind]
    with pytest.raises(WriteFailed, match="no permission to write"):
        writer(small_dataset(), locked_folder / name)
    assert list(locked_folder.iterdir()) == []


@pytest.mark.parametrize("kind", sorted(WRITERS))
def test_unwritable_folder_reported_before_any_file(tmp_path, kind, monkeypatch):
    # Simulates a read-only folder where the test runs as root (os.access is what the check consults).
    writer, name = WRITERS[kind]
    real_access = os.access
    monkeypatch.setattr(os, "access", lambda p, mode, **kw: False if mode == os.W_OK else real_access(p, mode, **kw))
    with pytest.raises(OpenCodeError, match="no permission to write"):
        writer(small_dataset(), tmp_path / name)
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize(
    ("kind", "target", "attribute"),
    [
        ("sav", "opencode.export.spss_stata.pyreadstat", "write_sav"),
        ("dta", "opencode.export.spss_stata.pyreadstat", "write_dta"),
    ],
)
def test_failure_mid_write_leaves_old_file_and_no_temp(tmp_path, kind, target, attribute, monkeypatch):
    writer, name = WRITERS[kind]
    out = tmp_path / name
    out.write_bytes(b"previous export")

    def half_write(df, path, **kwargs):
        with open(path, "wb") as handle:
            handle.write(b"partial")
        raise OSError("disk full")

    monkeypatch.setattr(f"{target}.{attribute}", half_write)
    with pytest.raises(WriteFailed, match=f"{name}: could not write: disk full; nothing was written"):
        writer(small_dataset(), out)
    assert out.read_bytes() == b"previous export"
    assert sorted(p.name for p in tmp_path.iterdir()) == [name]


def test_csv_failure_mid_write_leaves_no_partial(tmp_path, monkeypatch):
    def broken(value):
        if value == "-2+3 waste":
            raise RuntimeError("guard failed")
        return value

    monkeypatch.setattr("opencode.export.tabular.guard_cell", broken)
    with pytest.raises(RuntimeError):
        write_csv(small_dataset(), tmp_path / "out.csv", verbatims="raw")
    assert list(tmp_path.iterdir()) == []


def test_triple_s_failure_before_writing_leaves_no_files(tmp_path, monkeypatch):
    monkeypatch.setattr("opencode.export.triple_s._metadata_xml", lambda *a, **k: (_ for _ in ()).throw(OSError("full")))
    with pytest.raises(OSError):  # raised before any file is opened: passed on as it is
        write_triple_s(small_dataset(), tmp_path / "s.sss")
    assert list(tmp_path.iterdir()) == []

"""The one-line notice before the first run compiles the kernels."""

from __future__ import annotations

import pytest

from stopline.cli import _common


def test_notice_only_when_the_cache_is_empty(tmp_path, capsys: pytest.CaptureFixture) -> None:
    # common practice: tell the user why the first run is slow, and only then
    _common.first_run_notice(str(tmp_path))
    assert "first run after install" in capsys.readouterr().err
    (tmp_path / "_kernels.price_pair-1387.py311.nbi").write_bytes(b"")
    _common.first_run_notice(str(tmp_path))
    assert capsys.readouterr().err == ""
    assert _common.kernels_cached(str(tmp_path)) is True
    assert _common.kernels_cached(str(tmp_path / "missing")) is False


def test_cannot_tell_when_numba_caches_elsewhere(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("NUMBA_CACHE_DIR", "/somewhere/else")
    assert _common.kernels_cached() is None

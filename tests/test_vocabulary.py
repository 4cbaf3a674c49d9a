"""One name per idea: the public namespace, and old names kept for one release with a warning."""

from __future__ import annotations

import switchlaw


def test_dir_lists_public_names_and_dunders_only():
    # PEP 562 module __dir__: what dir() shows is up to the module (common practice, no source).
    extra = [name for name in dir(switchlaw) if name not in switchlaw.__all__]
    assert "annotations" not in dir(switchlaw) and "importlib" not in dir(switchlaw)
    assert all(name.startswith("__") and name.endswith("__") for name in extra), extra
    assert set(switchlaw.__all__) <= set(dir(switchlaw))

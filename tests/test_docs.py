"""Every ```python block in docs/**/*.md runs, and the hook reference matches the hookspecs.

Blocks of one page run in order, in one shared namespace, in a fresh temporary working
directory that holds a copy of docs/ (so a path such as ``docs/suites/echo-compare.toml``
works as it does from the repository root, and nothing a page writes lands in the checkout).
A block opts out only with the marker comment as its first line::

    # docs-test: skip (REASON)

for the rare block that cannot run here (a cluster address, an instrument). The reason is
required. Other fences (```toml, ```bash, ```text) are never run.
"""

from __future__ import annotations

import inspect
import re
import shutil
import sys
import types
import warnings
from pathlib import Path

import pytest

import timescale
from timescale.contract import hookdoc, hookspecs, registry

DOCS = Path(__file__).resolve().parent.parent / "docs"
SKIP_MARK = re.compile(r"^\s*#\s*docs-test:\s*skip\s*\((?P<reason>[^)]+)\)\s*$")
_FENCE = re.compile(r"^(?P<indent>[ \t]*)```(?P<lang>[^\s`]*)[^\n]*$")


def python_blocks(text: str):
    """Return ``[(first line number, code)]`` for every ```python fence in `text`."""
    blocks, lines, i = [], text.splitlines(), 0
    while i < len(lines):
        m = _FENCE.match(lines[i])
        if not m:
            i += 1
            continue
        start, lang, indent = i + 1, m["lang"].lower(), m["indent"]
        j = i + 1
        while j < len(lines) and not lines[j].strip().startswith("```"):
            j += 1
        if lang in ("python", "py", "python3"):
            body = [ln[len(indent):] if ln.startswith(indent) else ln for ln in lines[start:j]]
            blocks.append((start + 1, "\n".join(body)))
        i = j + 1
    return blocks


README = DOCS.parent / "README.md"


def _pages():
    pages = sorted(p for p in DOCS.rglob("*.md") if python_blocks(p.read_text(encoding="utf-8")))
    return [README] + pages  # the README's quick start is held to the same standard


def test_block_parser_finds_fences_and_skips_others():
    text = "a\n```python\nx = 1\n```\n```toml\ny = 2\n```\n  ```python\n  z = 3\n  ```\n"
    assert python_blocks(text) == [(3, "x = 1"), (9, "z = 3")]


def test_skip_marker_needs_a_reason():
    assert SKIP_MARK.match("# docs-test: skip (needs a Dask scheduler)")
    assert not SKIP_MARK.match("# docs-test: skip")


@pytest.mark.parametrize("page", _pages(), ids=lambda p: str(p.relative_to(DOCS.parent)))
def test_page_code_runs(page, tmp_path, monkeypatch):
    shutil.copytree(DOCS, tmp_path / "docs",
                    ignore=shutil.ignore_patterns("*.egg-info", "build", "__pycache__", "*.nc"))
    monkeypatch.chdir(tmp_path)
    before = set(registry._code_methods)
    # a real module, so that dataclasses and pickling can find the page's classes
    module = types.ModuleType(f"docs_page_{re.sub(r'[^0-9a-zA-Z]', '_', page.stem)}")
    monkeypatch.setitem(sys.modules, module.__name__, module)
    namespace = module.__dict__
    try:
        for line, code in python_blocks(page.read_text(encoding="utf-8")):
            first = code.lstrip().splitlines()[0] if code.strip() else ""
            if first.lstrip().startswith("# docs-test:"):
                assert SKIP_MARK.match(first), (
                    f"{page.name}:{line}: bad marker {first!r}; write '# docs-test: skip (reason)'")
                continue
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", timescale.TimescaleWarning)
                exec(compile(code, f"{page.relative_to(DOCS.parent)}:{line}", "exec"), namespace)
    finally:
        import matplotlib.pyplot as plt

        plt.close("all")
        for name in set(registry._code_methods) - before:  # a page that registered and kept
            timescale.unregister_method(name)


# ---- the hook reference ------------------------------------------------------------------------

def _pluggy_hooks():
    """Hook names and argument names as pluggy itself reads them from the spec module."""
    import pluggy

    pm = pluggy.PluginManager("timescale")
    pm.add_hookspecs(hookspecs)
    return {name: caller.spec.argnames for name, caller in vars(pm.hook).items()
            if getattr(caller, "spec", None) is not None}


def test_every_hook_and_its_exact_signature_is_in_hooks_md():
    page = (DOCS / "hooks.md").read_text(encoding="utf-8")
    hooks = _pluggy_hooks()
    assert hooks, "no hook specifications found"
    for name, argnames in hooks.items():
        func = getattr(hookspecs, name)
        sig = f"{name}{inspect.signature(func)}".replace("'", "")  # postponed annotations
        assert sig in page, f"docs/hooks.md lacks the signature {sig!r}"
        assert f"### {name}" in page, f"docs/hooks.md lacks a section for {name}"
        for arg in argnames:
            assert arg in sig
        summary = inspect.getdoc(func).splitlines()[0]
        assert summary in page, f"docs/hooks.md lacks the summary of {name}"


def test_hooks_md_is_up_to_date():
    page = (DOCS / "hooks.md").read_text(encoding="utf-8")
    assert page == hookdoc.render(), (
        "docs/hooks.md is stale: run `python -m timescale.contract.hookdoc > docs/hooks.md`")

"""Locate the ES modules of the custom views and bundle them into one module.

anywidget loads a view's ES module from a ``blob:`` URL, where relative
imports such as ``import { linearScale } from "./lib/scale.js"`` cannot
resolve. :func:`bundle` therefore inlines the modules an entry module imports
(recursively) into a single ES module string at load time, in Python, with no
build step and no third-party bundler.

The inliner understands exactly the module style used in ``js/``:

* imports of the form ``import { a, b as c } from "./relative/path.js";``
  (named imports from relative paths only; anything else is rejected, which
  also guarantees that nothing is imported from a CDN or a package);
* exports written as ``export function name``, ``export const name``,
  ``export let name`` or ``export class name``;
* ``export default`` only in the entry module.

Each imported module becomes a function scope returning its exports, so
private names of different modules never collide.
"""

from __future__ import annotations

import functools
import re
from pathlib import Path

__all__ = ["BundleError", "bundle", "js_dir"]

_PACKAGE_DIR = Path(__file__).resolve().parent.parent  # .../mwkin

# `import { a, b as c } from "./x.js";` -- braces may span lines
_IMPORT_RE = re.compile(
    r"^[ \t]*import\s*\{(?P<names>[^}]*)\}\s*from\s*(?P<q>[\"'])(?P<spec>[^\"']+)(?P=q)[ \t]*;?[ \t]*$",
    re.MULTILINE,
)
_ANY_IMPORT_RE = re.compile(r"^[ \t]*import\b", re.MULTILINE)
_DYNAMIC_IMPORT_RE = re.compile(r"\bimport\s*\(")
_EXPORT_DECL_RE = re.compile(
    r"^(?P<indent>[ \t]*)export[ \t]+(?P<kind>(?:async[ \t]+)?function\*?|const|let|class)[ \t]+"
    r"(?P<name>[A-Za-z_$][\w$]*)",
    re.MULTILINE,
)
_EXPORT_DEFAULT_RE = re.compile(r"^[ \t]*export[ \t]+default\b", re.MULTILINE)
_ANY_EXPORT_RE = re.compile(r"^[ \t]*export\b", re.MULTILINE)
_IDENT_RE = re.compile(r"^[A-Za-z_$][\w$]*$")


class BundleError(ValueError):
    """An ES module uses a construct the inliner does not support, or is missing."""


def js_dir() -> Path:
    """The folder holding the views' ES modules.

    Returns
    -------
    pathlib.Path
        ``mwkin/_js`` inside an installed wheel (the wheel force-includes the
        repository's ``js/`` there), else the repository's ``js/`` next to the
        package (editable install or a source checkout).

    Raises
    ------
    FileNotFoundError
        If neither folder exists.
    """
    for candidate in (_PACKAGE_DIR / "_js", _PACKAGE_DIR.parent / "js"):
        if (candidate / "lib").is_dir():
            return candidate
    raise FileNotFoundError(
        f"mwkin's ES modules were not found in {_PACKAGE_DIR / '_js'} (installed wheel) "
        f"nor in {_PACKAGE_DIR.parent / 'js'} (source checkout)"
    )


def _parse_names(names: str, path: Path) -> list[tuple[str, str]]:
    """``"a, b as c"`` -> ``[("a", "a"), ("b", "c")]`` (exported name, local name)."""
    pairs = []
    for part in names.split(","):
        part = " ".join(part.split())
        if not part:
            continue
        words = part.split(" ")
        if len(words) == 1:
            exported = local = words[0]
        elif len(words) == 3 and words[1] == "as":
            exported, local = words[0], words[2]
        else:
            raise BundleError(f"{path}: cannot read the imported name {part!r}")
        if not (_IDENT_RE.match(exported) and _IDENT_RE.match(local)):
            raise BundleError(f"{path}: cannot read the imported name {part!r}")
        pairs.append((exported, local))
    return pairs


def _scope_name(path: Path, root: Path) -> str:
    rel = path.relative_to(root).with_suffix("").as_posix()
    return "__mwkin_" + re.sub(r"[^A-Za-z0-9_]", "_", rel)


class _Bundler:
    def __init__(self, root: Path):
        self.root = root.resolve()
        self.done: dict[Path, tuple[str, set[str]]] = {}  # path -> (scope name, exports)
        self.active: list[Path] = []
        self.chunks: list[str] = []

    def _resolve(self, spec: str, importer: Path) -> Path:
        if not spec.startswith(("./", "../")):
            raise BundleError(
                f"{importer}: only relative imports of our own modules are allowed, got {spec!r} "
                "(the views must work offline, with nothing fetched at run time)"
            )
        target = (importer.parent / spec).resolve()
        if self.root not in target.parents:
            raise BundleError(f"{importer}: import {spec!r} points outside {self.root}")
        if not target.is_file():
            raise BundleError(f"{importer}: imported module {spec!r} not found at {target}")
        return target

    def _rewrite_imports(self, source: str, path: Path) -> str:
        def replace(match: re.Match) -> str:
            target = self._resolve(match["spec"], path)
            scope, exports = self._module(target)
            pairs = _parse_names(match["names"], path)
            missing = [e for e, _ in pairs if e not in exports]
            if missing:
                raise BundleError(f"{path}: {target.name} does not export {', '.join(missing)}")
            fields = ", ".join(e if e == loc else f"{e}: {loc}" for e, loc in pairs)
            return f"const {{ {fields} }} = {scope};"

        body = _IMPORT_RE.sub(replace, source)
        if _ANY_IMPORT_RE.search(body) or _DYNAMIC_IMPORT_RE.search(body):
            raise BundleError(f'{path}: unsupported import form; use `import {{ name }} from "./file.js";` only')
        return body

    def _module(self, path: Path) -> tuple[str, set[str]]:
        """Emit a library module (once) and return its scope name and exports."""
        if path in self.done:
            return self.done[path]
        if path in self.active:
            cycle = " -> ".join(p.name for p in [*self.active, path])
            raise BundleError(f"circular import between ES modules: {cycle}")
        self.active.append(path)
        source = path.read_text(encoding="utf-8")
        if _EXPORT_DEFAULT_RE.search(source):
            raise BundleError(f"{path}: `export default` is only allowed in an entry module")
        body = self._rewrite_imports(source, path)
        exports = [m["name"] for m in _EXPORT_DECL_RE.finditer(body)]
        body = _EXPORT_DECL_RE.sub(lambda m: f"{m['indent']}{m['kind']} {m['name']}", body)
        if _ANY_EXPORT_RE.search(body):
            raise BundleError(f"{path}: unsupported export form; use `export function|const|let|class name`")
        scope = _scope_name(path, self.root)
        rel = path.relative_to(self.root).as_posix()
        self.chunks.append(
            f"// ---- {rel} ----\nconst {scope} = (() => {{\n{body}\nreturn {{ {', '.join(exports)} }};\n}})();\n"
        )
        self.active.pop()
        self.done[path] = (scope, set(exports))
        return self.done[path]

    def entry(self, path: Path) -> str:
        source = path.read_text(encoding="utf-8")
        self.active.append(path)
        body = self._rewrite_imports(source, path)
        self.active.pop()
        if not _EXPORT_DEFAULT_RE.search(body):
            raise BundleError(f"{path}: an entry module needs `export default {{ render }}`")
        rel = path.relative_to(self.root).as_posix()
        header = f"// Bundled by mwkin.widgets._assets from js/{rel} and the modules it imports.\n"
        return header + "\n".join(self.chunks) + f"// ---- {rel} ----\n{body}"


def bundle(entry: str, root: Path | None = None) -> str:
    """One ES module with the entry module and everything it imports inlined.

    Parameters
    ----------
    entry : str
        File name of the entry module relative to the js folder, e.g.
        ``"scatter.js"``.
    root : pathlib.Path, optional
        The js folder; :func:`js_dir` by default.

    Returns
    -------
    str
        ES module source with no ``import`` statements left, ending in the
        entry module's ``export default``.

    Raises
    ------
    BundleError
        For a non-relative import (packages, URLs), a dynamic ``import()``, a
        circular import, a missing module or name, or an export form the
        inliner does not read.

    Notes
    -----
    Results are cached per (root, entry); files are read once per process.
    """
    root = Path(root) if root is not None else js_dir()
    return _bundle_cached(root.resolve(), entry)


@functools.cache
def _bundle_cached(root: Path, entry: str) -> str:
    path = (root / entry).resolve()
    if not path.is_file():
        raise BundleError(f"entry module {entry!r} not found in {root}")
    return _Bundler(root).entry(path)

"""The JavaScript a report loads: public CDN addresses, or local bundles inlined.

An embedded widget page needs require.js, the Jupyter widgets HTML manager
(``@jupyter-widgets/html-manager``, ``dist/embed-amd.js``) and the AMD bundles
of every third-party widget library on the page (bqplot and bqscales).

* CDN (default): require.js and the HTML manager from public CDNs; bqscales
  from jsDelivr (the manager's own fallback). bqplot's JavaScript 0.6.x is not
  published on npm, so bqplot's bundle is always taken from the installed
  wheel and inlined.
* Offline: every bundle is inlined, so the page opens from ``file://`` with no
  network: require.js from voila's wheel, bqplot and bqscales from their
  wheels, the HTML manager from a directory the user fetched (``npm pack
  @jupyter-widgets/html-manager@1``; see ``scripts/fetch_widget_bundles.sh``)
  with its icon fonts inlined as data URLs.

Inlined bundles get a module name (``define([`` becomes ``define("bqplot", [``)
and every ``</script`` and ``<!--`` inside them is escaped, so the HTML parser
cannot end or confuse the script element.
"""

from __future__ import annotations

import base64
import os
import re
import site
import sys
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

__all__ = [
    "REQUIRE_JS_URL",
    "HTML_MANAGER_URL",
    "Bundles",
    "find_share_file",
    "html_manager_bundle",
    "inline_script",
    "named_amd",
    "cdn_bundles",
    "offline_bundles",
]

#: require.js as ipywidgets' own embedding loads it (cdnjs, with its integrity hash)
REQUIRE_JS_URL = "https://cdnjs.cloudflare.com/ajax/libs/require.js/2.3.4/require.min.js"
REQUIRE_JS_INTEGRITY = "sha256-Ae2Vz/4ePdIu6ZyI/5ZGsYnb+m0JlOmKPjt6XZ9JJkA="
#: the HTML manager of ipywidgets 8 on jsDelivr
HTML_MANAGER_URL = "https://cdn.jsdelivr.net/npm/@jupyter-widgets/html-manager@^1.0.1/dist/embed-amd.js"

_BQPLOT = ("nbextensions", "bqplot", "index.js")
_BQSCALES = ("nbextensions", "bqscales", "index.js")
_REQUIRE = ("voila", "templates", "base", "static", "require.min.js")
_FONT_TYPES = {
    ".woff2": "font/woff2",
    ".woff": "font/woff",
    ".ttf": "font/ttf",
    ".eot": "application/vnd.ms-fontobject",
    ".svg": "image/svg+xml",
}


@dataclass(frozen=True)
class Bundles:
    """The script elements of a page (HTML text, in loading order) and how they were found."""

    scripts: tuple[str, ...]
    offline: bool
    sources: tuple[str, ...]

    def html(self) -> str:
        return "\n".join(self.scripts)


def _share_dirs() -> list[Path]:
    dirs = [Path(sys.prefix) / "share" / "jupyter", Path(sys.base_prefix) / "share" / "jupyter"]
    user = getattr(site, "USER_BASE", None)
    if user:
        dirs.append(Path(user) / "share" / "jupyter")
    try:  # jupyter's own search path, where installed
        from jupyter_core.paths import jupyter_path

        dirs += [Path(p) for p in jupyter_path()]
    except ImportError:  # pragma: no cover - jupyter_core comes with ipykernel
        pass
    return list(dict.fromkeys(dirs))


def find_share_file(parts: tuple[str, ...], what: str) -> Path:
    """A file under ``share/jupyter`` of this environment (first match), or a clear error."""
    for d in _share_dirs():
        p = d.joinpath(*parts)
        if p.is_file():
            return p
    where = "/".join(("share", "jupyter", *parts))
    raise FileNotFoundError(f"{what} must be installed ({where} under {sys.prefix}), but it was not found")


def inline_script(js: str, comment: str = "") -> str:
    """A ``<script>`` element holding ``js``, escaped so the HTML parser keeps it whole."""
    safe = re.sub(r"</(script)", r"<\\/\1", js, flags=re.IGNORECASE)
    safe = safe.replace("<!--", "<\\!--")
    head = f"<!-- {comment} -->\n" if comment else ""
    return f"{head}<script>\n{safe}\n</script>"


def named_amd(js: str, name: str, source: str = "bundle") -> str:
    """Give the one anonymous AMD module of a bundle a name (``define([`` -> ``define("name",[``)."""
    found = re.findall(r"\bdefine\((?=\[|function)", js)
    if len(found) != 1:
        raise ValueError(f"{source} must hold exactly one anonymous AMD module, not {len(found)}")
    return re.sub(r"\bdefine\((?=\[|function)", f'define("{name}",', js, count=1)


@lru_cache(maxsize=4)
def _wheel_module(parts: tuple[str, ...], name: str, mtime: float) -> str:
    path = find_share_file(parts, f"{name}'s JavaScript bundle")
    # only where require.js loaded: a CDN page opened with no network skips the module (its static
    # pictures stay) instead of logging "define is not defined"
    js = 'if (typeof define === "function" && define.amd) {\n' + named_amd(path.read_text(encoding="utf-8"),
                                                                             name, str(path)) + "\n}"  # fmt: skip
    return inline_script(js, f"{name} (from the wheel)")


def _wheel_script(parts: tuple[str, ...], name: str) -> tuple[str, str]:
    path = find_share_file(parts, f"{name}'s JavaScript bundle")
    return _wheel_module(parts, name, path.stat().st_mtime), str(path)


def html_manager_bundle(directory: str | os.PathLike[str]) -> Path:
    """``embed-amd.js`` of the HTML manager in ``directory`` (the package, its ``dist`` or their parent)."""
    root = Path(directory)
    for cand in (root / "dist" / "embed-amd.js", root / "embed-amd.js", root / "html-manager" / "dist" / "embed-amd.js",
                 root / "package" / "dist" / "embed-amd.js"):  # fmt: skip
        if cand.is_file():
            return cand
    raise ValueError(
        f"offline_bundles must be a directory holding dist/embed-amd.js of @jupyter-widgets/html-manager "
        f"(get it with scripts/fetch_widget_bundles.sh), not {os.fspath(directory)!r}"
    )


def _inline_fonts(js: str, dist: Path) -> str:
    """Replace the webpack asset references ``x.p+"<hash>.<ext>"`` by data URLs.

    Browsers that take the first format they support read the woff2 fonts;
    the other formats (eot, woff, ttf, svg) get an empty data URL to keep the
    file small.
    """

    def sub(m: re.Match[str]) -> str:
        name = m.group(1)
        ext = os.path.splitext(name)[1].lower()
        path = dist / name
        if ext == ".woff2" and path.is_file():
            data = base64.b64encode(path.read_bytes()).decode("ascii")
            return f'"data:{_FONT_TYPES[ext]};base64,{data}"'
        return f'"data:{_FONT_TYPES.get(ext, "application/octet-stream")};base64,"'

    return re.sub(r'\b[A-Za-z_$][\w$]*\.p\+"([0-9a-f]{8,}\.(?:woff2|woff|ttf|eot|svg))"', sub, js)


def cdn_bundles() -> Bundles:
    """Scripts of the default page: require.js and the HTML manager from public CDNs (bqplot inlined)."""
    bq, bq_src = _wheel_script(_BQPLOT, "bqplot")
    scripts = (
        f'<script src="{REQUIRE_JS_URL}" integrity="{REQUIRE_JS_INTEGRITY}" crossorigin="anonymous"></script>',
        bq,
        f'<script src="{HTML_MANAGER_URL}" crossorigin="anonymous"></script>',
    )
    return Bundles(scripts, False, (REQUIRE_JS_URL, bq_src, HTML_MANAGER_URL, "bqscales from jsDelivr"))


def offline_bundles(directory: str | os.PathLike[str]) -> Bundles:
    """Scripts of the offline page: everything inlined (see the module text)."""
    manager = html_manager_bundle(directory)
    require = find_share_file(_REQUIRE, "voila (for require.js)")
    bq, bq_src = _wheel_script(_BQPLOT, "bqplot")
    bqs, bqs_src = _wheel_script(_BQSCALES, "bqscales")
    embed = _inline_fonts(manager.read_text(encoding="utf-8"), manager.parent)
    scripts = (
        inline_script(require.read_text(encoding="utf-8"), "require.js (from voila's wheel)"),
        bq,
        bqs,
        inline_script(embed, "@jupyter-widgets/html-manager (embed-amd.js)"),
    )
    return Bundles(scripts, True, (str(require), bq_src, bqs_src, str(manager)))

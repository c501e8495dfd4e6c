"""Static forms of saved widgets, for pages read with JavaScript off.

Works on the notebook's saved widget state (the ``application/vnd.jupyter.widget-state+json``
document: each model's name, its state, and its binary buffers as base64 with the state path
they belong to). A box shows its children in order, an image its picture, a bqplot figure an
SVG drawn here from its marks' saved arrays (lines, scatter, bars; linear or log scales), a
control its description and value, an HTML widget its text. Nothing is recomputed: the forms
show the saved values only.
"""

from __future__ import annotations

import base64
import html
from html.parser import HTMLParser
from typing import Any

import numpy as np

from ._static import esc

__all__ = ["static_forms"]

_BOXES = {"VBoxModel", "HBoxModel", "BoxModel", "GridBoxModel", "TabModel", "AccordionModel", "StackModel"}
_MARKS = {"LinesModel", "ScatterModel", "BarsModel"}
_W, _H, _PAD = 480, 260, 36
_PALETTE = ("#1f77b4", "#ff7f0e", "#2ca02c", "#d62728", "#9467bd", "#8c564b")


def _decoded(entry: dict[str, Any]) -> dict[str, Any]:
    """The model's state with every buffer put back at its path (as bytes)."""
    state = dict(entry.get("state", {}))
    for buf in entry.get("buffers", []):
        path = list(buf.get("path", []))
        if not path:
            continue
        data = base64.b64decode(buf.get("data", "")) if buf.get("encoding", "base64") == "base64" else b""
        node: Any = state
        for key in path[:-1]:
            if isinstance(node, dict):
                node[key] = dict(node.get(key) or {}) if isinstance(node.get(key), dict) else node.get(key)
                node = node[key]
            elif isinstance(node, list) and isinstance(key, int) and key < len(node):
                node = node[key]
        if isinstance(node, dict):
            node[path[-1]] = data
    return state


def _array(value: Any) -> np.ndarray | None:
    """A bqplot array (``{"dtype", "shape", "value": bytes}``) or a plain list, as float64."""
    try:
        if isinstance(value, dict) and isinstance(value.get("value"), bytes):
            arr = np.frombuffer(value["value"], dtype=np.dtype(value["dtype"])).reshape(value["shape"])
            return arr.astype(np.float64)
        if isinstance(value, list):
            return np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError, KeyError):
        return None
    return None


def _ref(value: Any) -> str | None:
    return value[len("IPY_MODEL_") :] if isinstance(value, str) and value.startswith("IPY_MODEL_") else None


class _Text(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.parts: list[str] = []

    def handle_data(self, data: str) -> None:
        self.parts.append(data)


def _plain(markup: str) -> str:
    p = _Text()
    p.feed(markup)
    return " ".join(" ".join(p.parts).split())


class _Forms:
    def __init__(self, state: dict[str, Any]) -> None:
        self.models = state
        self._cache: dict[str, dict[str, Any]] = {}

    def state(self, mid: str) -> dict[str, Any]:
        if mid not in self._cache:
            self._cache[mid] = _decoded(self.models.get(mid, {}))
        return self._cache[mid]

    def name(self, mid: str) -> str:
        return str(self.models.get(mid, {}).get("model_name", ""))

    def form(self, mid: str, depth: int = 0) -> str:
        if mid not in self.models or depth > 12:
            return ""
        name, st = self.name(mid), self.state(mid)
        if name in _BOXES:
            kids = [self.form(r, depth + 1) for c in st.get("children", []) if (r := _ref(c))]
            return "".join(f"<div>{k}</div>" for k in kids if k)
        if name == "ImageModel" and isinstance(st.get("value"), bytes) and st["value"]:
            fmt = esc(st.get("format", "png"))
            src = base64.b64encode(st["value"]).decode("ascii")
            return f'<img alt="saved picture" src="data:image/{fmt};base64,{src}">'
        if name == "FigureModel":
            return self.figure(st)
        if name in ("HTMLModel", "HTMLMathModel"):
            return f"<p>{esc(_plain(str(st.get('value', ''))))}</p>"
        if "value" in st and not isinstance(st["value"], (bytes, dict)):
            label = str(st.get("description", "")).strip()
            value = st["value"]
            if isinstance(value, list):
                value = " - ".join(map(str, value))
            return f"<p>{esc(label + ': ' if label else '')}{esc(value)}</p>"
        return ""

    def figure(self, st: dict[str, Any]) -> str:
        series = []
        log_x = log_y = False
        for ref in st.get("marks", []):
            mid = _ref(ref)
            if mid is None or self.name(mid) not in _MARKS:
                continue
            m = self.state(mid)
            x, y = _array(m.get("x")), _array(m.get("y"))
            if x is None or y is None or x.size == 0 or y.size == 0:
                continue
            ys = np.atleast_2d(y)
            xs = np.broadcast_to(np.atleast_2d(x), ys.shape) if x.shape[-1] == ys.shape[-1] else None
            if xs is None:
                continue
            scales = m.get("scales", {})
            log_x = log_x or self.name(_ref(scales.get("x")) or "") == "LogScaleModel"
            log_y = log_y or self.name(_ref(scales.get("y")) or "") == "LogScaleModel"
            colors = m.get("colors") or _PALETTE
            labels = m.get("labels") or []
            for i in range(ys.shape[0]):
                series.append(
                    (self.name(mid), xs[i], ys[i], str(colors[i % len(colors)]), labels[i] if i < len(labels) else "")
                )
        if not series:
            return f"<p>{esc(st.get('title', 'figure'))} (no drawable marks saved)</p>"
        return _svg(str(st.get("title", "")), series, (log_x, log_y), self.axis_labels(st))

    def axis_labels(self, st: dict[str, Any]) -> tuple[str, str]:
        x_label = y_label = ""
        for ref in st.get("axes", []):
            mid = _ref(ref)
            if mid is None:
                continue
            a = self.state(mid)
            if a.get("orientation") == "vertical" or a.get("side") in ("left", "right"):
                y_label = str(a.get("label", ""))
            else:
                x_label = str(a.get("label", ""))
        return x_label, y_label


def _svg(
    title: str, series: list[tuple[str, Any, Any, str, str]], logs: tuple[bool, bool], labels: tuple[str, str]
) -> str:
    def _log(v: np.ndarray, on: bool) -> np.ndarray:
        return np.log10(np.where(v > 0, v, np.nan)) if on else v

    def fx(v: np.ndarray) -> np.ndarray:
        return _log(v, logs[0])

    def fy(v: np.ndarray) -> np.ndarray:
        return _log(v, logs[1])

    xs = np.concatenate([fx(s[1]) for s in series])
    ys = np.concatenate([fy(s[2]) for s in series])
    ok = np.isfinite(xs) & np.isfinite(ys)
    if not ok.any():
        return f"<p>{esc(title)} (no finite values saved)</p>"
    x0, x1 = float(xs[ok].min()), float(xs[ok].max())
    y0, y1 = float(ys[ok].min()), float(ys[ok].max())
    x1, y1 = (x1 if x1 > x0 else x0 + 1), (y1 if y1 > y0 else y0 + 1)

    def px(v: np.ndarray) -> np.ndarray:
        return _PAD + (v - x0) / (x1 - x0) * (_W - 2 * _PAD)

    def py(v: np.ndarray) -> np.ndarray:
        return _H - _PAD - (v - y0) / (y1 - y0) * (_H - 2 * _PAD)

    parts = [
        f'<rect x="{_PAD}" y="{_PAD}" width="{_W - 2 * _PAD}" height="{_H - 2 * _PAD}" fill="none" stroke="#999"/>'
    ]
    for kind, x, y, color, _label in series:
        xx, yy = fx(x), fy(y)
        good = np.isfinite(xx) & np.isfinite(yy)
        pts = np.stack([px(xx[good]), py(yy[good])], axis=1)
        if kind == "LinesModel":
            coords = " ".join(f"{a:.1f},{b:.1f}" for a, b in pts)
            parts.append(f'<polyline points="{coords}" fill="none" stroke="{esc(color)}" stroke-width="1.5"/>')
        else:
            parts.extend(f'<circle cx="{a:.1f}" cy="{b:.1f}" r="2.5" fill="{esc(color)}"/>' for a, b in pts)

    def shown(v: float, on: bool) -> str:
        return f"{10**v:.4g}" if on else f"{v:.4g}"

    text = [
        (_W / 2, 14, title, "middle"),
        (_PAD, _H - 8, shown(x0, logs[0]), "start"),
        (_W - _PAD, _H - 8, shown(x1, logs[0]), "end"),
        (_W / 2, _H - 8, labels[0] + (" (log scale)" if logs[0] else ""), "middle"),
        (
            4,
            _PAD - 6,
            f"{labels[1]}{' (log scale)' if logs[1] else ''}: {shown(y0, logs[1])} to {shown(y1, logs[1])}",
            "start",
        ),
    ]
    parts.extend(
        f'<text x="{x:.0f}" y="{y:.0f}" font-size="11" text-anchor="{a}">{esc(t)}</text>' for x, y, t, a in text if t
    )
    legend = ", ".join(f"{label}" for _k, _x, _y, _c, label in series if label)
    if legend:
        parts.append(
            f'<text x="{_W - _PAD}" y="{_H - _PAD + 14}" font-size="11" text-anchor="end">{esc(legend)}</text>'
        )
    return (
        f'<svg class="fxnet-static-figure" xmlns="http://www.w3.org/2000/svg" width="{_W}" height="{_H}" '
        f'viewBox="0 0 {_W} {_H}" role="img" aria-label="{html.escape(title)}">{"".join(parts)}</svg>'
    )


def static_forms(nb: Any, view_mime: str, state_mime: str) -> dict[str, str]:
    """Model id -> static HTML form, for every widget view shown in the notebook's outputs."""
    state = nb.metadata.get("widgets", {}).get(state_mime, {}).get("state", {})
    if not state:
        return {}
    forms = _Forms(state)
    out = {}
    for cell in nb.cells:
        for output in cell.get("outputs", []) if cell.cell_type == "code" else []:
            view = output.get("data", {}).get(view_mime)
            if isinstance(view, dict) and isinstance(view.get("model_id"), str):
                out[view["model_id"]] = forms.form(view["model_id"])
    return out

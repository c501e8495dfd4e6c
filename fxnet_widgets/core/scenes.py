"""Procedural camera frames over a produce-sorting belt (the demo scenario).

A frame shows a dark rubber belt between two metal side rails, carrying fruit
(ripe red, turning orange/yellow with green patches, unripe green) with their
stems and sepals, a few loose leaves, soft shadows under every object, specular
highlights, vignetting and sensor noise. Every frame comes with its ground
truth: a class index per pixel (:data:`CLASSES`) and the binary mask of the job
(ripe fruit skin vs everything else).

Everything is numpy float64 driven by one seed (``numpy.random.default_rng``),
so a frame is reproducible. The data are invented for the demo only.

Examples
--------
>>> scene = make_scene(seed=1, lighting="test", width=160, height=90)
>>> scene.image.shape, scene.image.dtype, scene.mask.shape
((90, 160, 3), dtype('uint8'), (90, 160))
>>> set(scene.mask.ravel().tolist()) <= {0, 255}
True
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "CLASSES",
    "CLASS_COLOURS",
    "LIGHTINGS",
    "Lighting",
    "Scene",
    "make_scene",
    "class_map_image",
]

#: classes of the ground-truth class map, in index order
CLASSES: tuple[str, ...] = ("background", "ripe", "turning", "unripe", "stem", "leaf", "highlight")
#: colour of each class in a class-map image (RGB codes)
CLASS_COLOURS: dict[str, tuple[int, int, int]] = {
    "background": (0, 0, 0),
    "ripe": (255, 0, 0),
    "turning": (255, 160, 0),
    "unripe": (0, 200, 0),
    "stem": (140, 70, 20),
    "leaf": (0, 90, 255),
    "highlight": (255, 255, 255),
}
RIPE = CLASSES.index("ripe")


@dataclass(frozen=True)
class Lighting:
    """The light over the belt.

    Parameters
    ----------
    name : str
        A short description.
    colour : tuple of float
        Linear RGB gain of the light (white balance of the camera included).
    intensity : float
        Strength of the direct light.
    direction : tuple of float
        Unit-ish vector towards the light (x right, y down, z towards the camera).
    ambient : float
        Strength of the diffuse ambient light.
    vignette : float
        Darkening at the frame corners (0 = none).
    noise : float
        Standard deviation of the sensor noise, in output codes.
    """

    name: str
    colour: tuple[float, float, float]
    intensity: float
    direction: tuple[float, float, float]
    ambient: float
    vignette: float
    noise: float


#: the two lightings of the demo: the training scene and the test scene
LIGHTINGS: dict[str, Lighting] = {
    "train": Lighting(
        "warm lamp, top left", (1.0, 0.92, 0.78), 1.0, (-0.45, -0.5, 0.74), 0.16, 0.25, 2.0
    ),
    "test": Lighting(
        "cool daylight, top right, dimmer",
        (0.82, 0.94, 1.08),
        0.82,
        (0.6, -0.25, 0.76),
        0.12,
        0.4,
        2.5,
    ),
}

# albedo (linear RGB) ranges of the fruit skin by ripeness
_SKIN = {
    "ripe": ((0.60, 0.035, 0.03), (0.86, 0.15, 0.05)),
    "turning": ((0.84, 0.24, 0.05), (0.86, 0.58, 0.12)),
    "unripe": ((0.22, 0.45, 0.08), (0.40, 0.62, 0.18)),
}
_PATCH_GREEN = (0.42, 0.60, 0.14)


@dataclass(frozen=True)
class Scene:
    """One frame with its ground truth.

    Attributes
    ----------
    image : numpy.ndarray
        H x W x 3 uint8 camera codes.
    classes : numpy.ndarray
        H x W uint8 class index into :data:`CLASSES`.
    lighting : Lighting
        The light used.
    seed : int
        The seed that made it.
    """

    image: np.ndarray
    classes: np.ndarray
    lighting: Lighting
    seed: int

    @property
    def mask(self) -> np.ndarray:
        """H x W uint8 mask: 255 for ripe fruit skin, 0 for everything else."""
        return np.where(self.classes == RIPE, 255, 0).astype(np.uint8)

    @property
    def class_map(self) -> np.ndarray:
        """H x W x 3 uint8 colour-coded class map (:data:`CLASS_COLOURS`)."""
        return class_map_image(self.classes)


def class_map_image(classes: np.ndarray) -> np.ndarray:
    """Colour-code an H x W array of class indices with :data:`CLASS_COLOURS`."""
    lut = np.array([CLASS_COLOURS[c] for c in CLASSES], dtype=np.uint8)
    return lut[np.asarray(classes, dtype=np.intp)]


def _smooth_noise(rng: np.random.Generator, h: int, w: int, cell: float) -> np.ndarray:
    """Value noise in [0, 1]: a coarse random grid, bilinearly interpolated."""
    gh, gw = int(np.ceil(h / cell)) + 2, int(np.ceil(w / cell)) + 2
    grid = rng.random((gh, gw))
    y = np.arange(h) / cell
    x = np.arange(w) / cell
    y0, x0 = np.floor(y).astype(int), np.floor(x).astype(int)
    fy, fx = (y - y0)[:, None], (x - x0)[None, :]
    fy, fx = fy * fy * (3 - 2 * fy), fx * fx * (3 - 2 * fx)  # smoothstep
    a = grid[y0][:, x0]
    b = grid[y0][:, x0 + 1]
    c = grid[y0 + 1][:, x0]
    d = grid[y0 + 1][:, x0 + 1]
    return (a * (1 - fx) + b * fx) * (1 - fy) + (c * (1 - fx) + d * fx) * fy


def _box_blur(a: np.ndarray, r: int) -> np.ndarray:
    """Separable box blur of radius ``r`` (edges padded by reflection)."""
    if r <= 0:
        return a
    k = 2 * r + 1
    for axis in (0, 1):
        pad = [(0, 0), (0, 0)]
        pad[axis] = (r + 1, r)
        c = np.cumsum(np.pad(a, pad, mode="reflect"), axis=axis)
        n = a.shape[axis]
        a = (
            np.take(c, np.arange(k, k + n), axis=axis) - np.take(c, np.arange(0, n), axis=axis)
        ) / k
    return a


def _belt(rng: np.random.Generator, h: int, w: int) -> tuple[np.ndarray, np.ndarray]:
    """Belt albedo (H x W x 3) and surface tilt term (H x W) for the belt and rails."""
    yy, xx = np.mgrid[0:h, 0:w].astype(np.float64)
    rail = max(4, int(round(h * 0.075)))
    grain = _smooth_noise(rng, h, w, 3.0) * 0.6 + _smooth_noise(rng, h, w, 17.0) * 0.4
    fine = rng.normal(0.0, 1.0, (h, w))
    base = 0.055 + 0.03 * grain + 0.006 * fine
    slat = max(8, int(round(w / 16)))
    offset = rng.uniform(0, slat)
    seam = np.abs(((xx + offset) % slat) - slat / 2) > slat / 2 - 1.2
    base = np.where(seam, base * 0.45, base)
    belt = np.stack([base * 1.0, base * 1.02, base * 1.08], axis=-1)
    # metal side rails: brushed grey with a rounded profile
    t = np.clip(np.minimum(yy, h - 1 - yy) / rail, 0, 1)
    in_rail = t < 1
    brushed = 0.34 + 0.06 * _smooth_noise(rng, h, w, 40.0) + 0.02 * rng.normal(0, 1, (h, w))
    profile = 0.75 + 0.35 * np.sin(np.pi * t)
    metal = np.stack(
        [brushed * profile, brushed * profile * 1.01, brushed * profile * 1.04], axis=-1
    )
    albedo = np.where(in_rail[..., None], metal, belt)
    tilt = np.where(in_rail, 0.8 + 0.2 * np.sin(np.pi * t), 1.0)
    return albedo, tilt


def _place(
    rng: np.random.Generator, h: int, w: int, n: int, rail: int
) -> list[tuple[float, float, float, float, float]]:
    """Non-overlapping fruit ellipses ``(cx, cy, rx, ry, angle)`` on the belt."""
    out: list[tuple[float, float, float, float, float]] = []
    scale = h / 360.0
    tries = 0
    while len(out) < n and tries < 4000:
        tries += 1
        r = rng.uniform(22, 33) * scale
        rx, ry = r * rng.uniform(0.95, 1.12), r * rng.uniform(0.88, 1.0)
        cx = rng.uniform(rx + 2, w - rx - 2)
        cy = rng.uniform(rail + ry + 4 * scale, h - rail - ry - 4 * scale)
        if all(np.hypot(cx - x, cy - y) > max(rx, ry) + max(a, b) + 3 for x, y, a, b, _ in out):
            out.append((cx, cy, rx, ry, rng.uniform(0, np.pi)))
    return out


def make_scene(
    seed: int = 0,
    lighting: str | Lighting = "train",
    *,
    width: int = 640,
    height: int = 360,
    n_fruit: int | None = None,
    n_leaves: int | None = None,
) -> Scene:
    """Render one frame of the produce belt with its ground truth.

    Parameters
    ----------
    seed : int
        Seed of every random choice (layout, ripeness, textures, noise).
    lighting : str or Lighting
        ``"train"``, ``"test"`` (see :data:`LIGHTINGS`) or a :class:`Lighting`.
    width, height : int
        Frame size in pixels (at least 32 x 32).
    n_fruit, n_leaves : int, optional
        How many fruit and loose leaves (default: scaled to the frame area).

    Returns
    -------
    Scene
        The frame, its class map and its lighting.
    """
    if isinstance(lighting, str):
        if lighting not in LIGHTINGS:
            raise ValueError(
                f"lighting must be one of {', '.join(LIGHTINGS)} or a Lighting, not {lighting!r}"
            )
        light = LIGHTINGS[lighting]
    elif isinstance(lighting, Lighting):
        light = lighting
    else:
        raise TypeError(f"lighting must be a name or a Lighting, not {lighting!r}")
    for name, v in (("width", width), ("height", height)):
        if not isinstance(v, int) or isinstance(v, bool):
            raise TypeError(f"{name} must be an integer, not {v!r}")
        if not 32 <= v <= 4096:
            raise ValueError(f"{name} must be between 32 and 4096, not {v!r}")
    if not isinstance(seed, int) or isinstance(seed, bool) or seed < 0:
        raise ValueError(f"seed must be a non-negative integer, not {seed!r}")
    rng = np.random.default_rng(seed)
    h, w = height, width
    area = h * w / (640 * 360)
    n_fruit = int(round(22 * area)) if n_fruit is None else n_fruit
    n_leaves = int(round(5 * area)) if n_leaves is None else n_leaves

    L = np.array(light.direction, dtype=np.float64)
    L /= np.linalg.norm(L)
    H = L + np.array([0.0, 0.0, 1.0])
    H /= np.linalg.norm(H)
    lc = np.array(light.colour)

    albedo, tilt = _belt(rng, h, w)
    diffuse = np.full((h, w), L[2]) * tilt  # flat surfaces face the camera
    spec = np.zeros((h, w))
    classes = np.zeros((h, w), dtype=np.uint8)
    shadow = np.zeros((h, w))
    yy, xx = np.mgrid[0:h, 0:w].astype(np.float64)
    rail = max(4, int(round(h * 0.075)))
    scale = h / 360.0

    fruit = _place(rng, h, w, n_fruit, rail)
    kinds = rng.choice(["ripe", "turning", "unripe"], size=len(fruit), p=[0.42, 0.29, 0.29])
    # loose leaves lying flat on the belt
    leaves = []
    for _ in range(n_leaves):
        length = rng.uniform(16, 26) * scale
        leaves.append(
            (
                rng.uniform(0, w),
                rng.uniform(rail + 10, h - rail - 10),
                length,
                length * rng.uniform(0.32, 0.45),
                rng.uniform(0, np.pi),
            )
        )

    # soft shadows cast on the belt (light direction projected on the belt)
    sx, sy = -L[0] / L[2], -L[1] / L[2]
    for cx, cy, rx, ry, _ in fruit:
        d = ((xx - cx - sx * rx * 0.55) / (rx * 1.02)) ** 2 + (
            (yy - cy - sy * ry * 0.55) / (ry * 0.98)
        ) ** 2
        shadow = np.maximum(shadow, (d < 1).astype(np.float64))
    for cx, cy, length, width_, ang in leaves:
        u = ((xx - cx - sx * 2) * np.cos(ang) + (yy - cy - sy * 2) * np.sin(ang)) / length
        v = (-(xx - cx - sx * 2) * np.sin(ang) + (yy - cy - sy * 2) * np.cos(ang)) / width_
        shadow = np.maximum(shadow, 0.5 * ((np.abs(v) < (1 - u * u)) & (np.abs(u) < 1)))
    shadow = _box_blur(_box_blur(shadow, max(1, int(4 * scale))), max(1, int(3 * scale)))
    direct = light.intensity * diffuse * (1 - 0.85 * shadow)

    def paint(
        sel: np.ndarray, alb: np.ndarray, dif: np.ndarray, sp: np.ndarray, cls: int | np.ndarray
    ) -> None:
        albedo[sel] = alb
        direct[sel] = dif
        spec[sel] = sp
        classes[sel] = cls

    for cx, cy, length, width_, ang in leaves:
        u = ((xx - cx) * np.cos(ang) + (yy - cy) * np.sin(ang)) / length
        v = (-(xx - cx) * np.sin(ang) + (yy - cy) * np.cos(ang)) / width_
        sel = (np.abs(u) < 1) & (np.abs(v) < (1 - u * u) * (1 - 0.2 * u))
        if not sel.any():
            continue
        tone = rng.uniform(0.8, 1.15)
        rib = np.abs(v[sel]) < 0.08
        col = np.array([0.07, 0.26, 0.045]) * tone
        alb = np.where(rib[:, None], col * np.array([1.8, 1.5, 1.4]), col)
        alb = alb * (0.9 + 0.2 * _smooth_noise(rng, h, w, 5.0)[sel])[:, None]
        nz = 0.9 + 0.1 * np.sign(v[sel]) * np.sin(ang)
        paint(sel, alb, light.intensity * L[2] * nz, np.zeros(sel.sum()), CLASSES.index("leaf"))

    patch = _smooth_noise(rng, h, w, 9.0)
    mottle = _smooth_noise(rng, h, w, 4.0)
    order = np.argsort([f[1] for f in fruit], kind="stable")
    for i in order:
        cx, cy, rx, ry, ang = fruit[i]
        kind = str(kinds[i])
        ca, sa = np.cos(ang), np.sin(ang)
        x0, x1 = int(max(0, cx - rx - ry - 2)), int(min(w, cx + rx + ry + 3))
        y0, y1 = int(max(0, cy - rx - ry - 2)), int(min(h, cy + rx + ry + 3))
        bx, by = xx[y0:y1, x0:x1] - cx, yy[y0:y1, x0:x1] - cy
        u = (bx * ca + by * sa) / rx
        v = (-bx * sa + by * ca) / ry
        d2 = u * u + v * v
        inside = d2 < 1
        if not inside.any():
            continue
        nz = np.sqrt(np.clip(1 - d2, 0, 1))
        # normal in image axes (rotate the ellipse-frame normal back)
        nx, ny = u * ca - v * sa, u * sa + v * ca
        lam = np.clip(nx * L[0] + ny * L[1] + nz * L[2], 0, 1)
        blinn = np.clip(nx * H[0] + ny * H[1] + nz * H[2], 0, 1)
        lo, hi = (np.array(c) for c in _SKIN[kind])
        mix = rng.uniform(0, 1)
        m = mottle[y0:y1, x0:x1][..., None]
        skin = lo + (hi - lo) * np.clip(mix + 0.35 * (m - 0.5), 0, 1)
        if kind == "turning":
            g = np.clip((patch[y0:y1, x0:x1] - rng.uniform(0.45, 0.6)) * 4, 0, 1)[..., None]
            skin = skin * (1 - 0.7 * g) + np.array(_PATCH_GREEN) * 0.7 * g
        gloss = rng.uniform(0.7, 1.1)
        sp = gloss * blinn**30
        lit = light.intensity * lam
        cls = np.full(u.shape, CLASSES.index(kind), dtype=np.uint8)
        # highlights: where the specular term washes the skin colour out
        cls[sp * light.intensity > 0.22] = CLASSES.index("highlight")
        # stem and sepals near the top of the fruit (as seen from above)
        if rng.random() < 0.8:
            ox, oy = rng.normal(0, 0.25, 2)
            su, sv = u - ox, v - oy
            r_st = np.hypot(su * rx, sv * ry)
            theta = np.arctan2(sv, su) + rng.uniform(0, 2 * np.pi)
            sepal_len = rng.uniform(0.35, 0.55) * (rx + ry) / 2
            star = r_st < sepal_len * (0.25 + 0.75 * np.abs(np.cos(2.5 * theta)) ** 6)
            stem = r_st < 3.2 * scale
            green = np.array([0.09, 0.24, 0.04]) * rng.uniform(0.8, 1.2)
            brown = np.array([0.22, 0.16, 0.06])
            skin = np.where(star[..., None], green, skin)
            skin = np.where(stem[..., None], brown, skin)
            sp = np.where(star | stem, 0.1 * sp, sp)
            cls = np.where(star | stem, CLASSES.index("stem"), cls).astype(np.uint8)
        sel = np.zeros((h, w), dtype=bool)
        sel[y0:y1, x0:x1] = inside
        paint(sel, skin[inside], lit[inside], sp[inside], cls[inside])

    ambient = light.ambient
    linear = albedo * (ambient + direct)[..., None] * lc + (spec * light.intensity)[..., None] * lc
    r2 = ((xx - w / 2) / (w / 2)) ** 2 + ((yy - h / 2) / (h / 2)) ** 2
    linear *= (1 - light.vignette * r2 / 2)[..., None]
    encoded = 255.0 * np.clip(linear, 0, 1) ** (1 / 2.2)
    encoded += rng.normal(0.0, light.noise, encoded.shape)
    image = np.clip(np.rint(encoded), 0, 255).astype(np.uint8)
    image.setflags(write=False)
    classes.setflags(write=False)
    return Scene(image, classes, light, seed)

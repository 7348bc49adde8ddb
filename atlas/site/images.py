"""Published images: resized copies for ``srcset``, metadata stripped, SVG checked.

Only images that a published page shows are published: the images of visible objects and of
characters, and images that notes and pages embed with ``media:NAME``. For each:

- a raster image (JPEG, PNG, WebP, GIF) is decoded, turned upright by its EXIF orientation,
  converted to sRGB when it carries an ICC profile, and written again from its pixels alone,
  so no EXIF (with GPS positions), XMP, IPTC, ICC profile, PNG text chunk or comment survives.
  It is published at its own size under its own name (``media/NAME``), and as smaller copies
  ``media/STEM-<w>w.EXT`` for each width of :data:`WIDTHS` below its own (never upscaled);
  the 160-pixel copy serves as a thumbnail. An animated GIF is published as its first frame;
- an SVG file is copied byte for byte, after checking it can do nothing but draw: no
  ``<script``, no ``on…=`` event attributes, no ``javascript:``, no ``<foreignObject>``, no
  entity declarations, and no reference to anything outside the file (``href``/``src`` other
  than ``#fragment`` or an embedded ``data:image/…``, ``url(…)`` other than ``url(#…)``,
  ``@import``). A file that breaks a rule stops the build with every problem listed.

Encoding is deterministic: the same pixels and Pillow version give the same bytes.
"""

from __future__ import annotations

import io
import re
import warnings
from dataclasses import replace
from pathlib import Path, PurePosixPath

from ..cache import Cache, Hasher
from ..errors import Problems
from ..model import Atlas
from ..parallel import map_forked
from .views import PagePlan, root_of

WIDTHS = (160, 320, 640, 1280)
DEFAULT_WIDTH = 640  # the ``src`` of an <img>: the largest copy at most this wide
SIZES = "(min-width: 60rem) 40rem, 100vw"
RASTER = {".jpg": "JPEG", ".jpeg": "JPEG", ".png": "PNG", ".webp": "WEBP", ".gif": "GIF"}
MAX_PIXELS = 80_000_000  # refuse larger images (a decompression bomb, or a scan to shrink first)
_MEDIA_REF = re.compile(r"media:([^\s)\"'<>]+)")

# SVG rules: (pattern, what is wrong). Matched case-insensitively on the decoded text.
_SVG_RULES = (
    (re.compile(r"<\s*script", re.IGNORECASE), "contains a <script> element"),
    (re.compile(r"\son[a-z]+\s*=", re.IGNORECASE), "has an event-handler attribute (on…=)"),
    (re.compile(r"javascript\s*:", re.IGNORECASE), "contains a javascript: URL"),
    (re.compile(r"<\s*foreignObject", re.IGNORECASE), "contains a <foreignObject> element"),
    (re.compile(r"<!ENTITY", re.IGNORECASE), "declares XML entities"),
    (re.compile(r"@import", re.IGNORECASE), "imports a stylesheet (@import)"),
    (re.compile(r"""\b(?:href|src)\s*=\s*["']\s*(?!#|data:image/)[^"'\s]""", re.IGNORECASE),
     "refers to a file or address outside itself (href/src)"),
    (re.compile(r"""url\(\s*["']?\s*(?!#|data:image/)[^)"'\s]""", re.IGNORECASE),
     "refers to a file or address outside itself (url(…))"),
)


def shown_images(atlas: Atlas) -> list[str]:
    """Names (inside the media folder) of every image a published page shows, sorted."""
    shown = {im.file for o in atlas.visible_objects() for im in o.images}
    shown |= {c.image.file for c in atlas.characters if c.image is not None}
    bodies = [o.body for o in atlas.visible_objects()]
    bodies += [c.body for c in atlas.characters]
    bodies += [n.body for n in atlas.clade_notes] + [p.body for p in atlas.pages]
    for body in bodies:
        shown |= {m for m in _MEDIA_REF.findall(body) if m in atlas.media}
    return sorted(shown)


def check_svg(data: bytes, name: str, problems: Problems) -> None:
    """Add a problem for each rule the SVG breaks (file and line)."""
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        problems.error(name, None, "is not UTF-8 text, so it cannot be checked as SVG",
                       "save it as UTF-8")
        return
    for pattern, what in _SVG_RULES:
        for m in pattern.finditer(text):
            problems.error(name, text.count("\n", 0, m.start()) + 1, f"SVG {what}",
                           "SVG images are published only when they can do nothing but draw")
            break


def variant_name(name: str, width: int) -> str:
    """``sub/lamp.jpg`` at 320 px -> ``sub/lamp-320w.jpg``.

    >>> variant_name("sub/lamp.jpg", 320)
    'sub/lamp-320w.jpg'
    """
    path = PurePosixPath(name)
    return str(path.with_name(f"{path.stem}-{width}w{path.suffix}"))


def _clean(image):
    """The image's pixels alone, upright and in sRGB: no metadata travels with them."""
    from PIL import Image, ImageCms, ImageOps

    image = ImageOps.exif_transpose(image)
    icc = image.info.get("icc_profile")
    if icc and image.mode in ("RGB", "RGBA", "L", "LA", "CMYK"):
        try:
            source = ImageCms.ImageCmsProfile(io.BytesIO(icc))
            mode = "RGBA" if "A" in image.mode else "RGB"
            image = ImageCms.profileToProfile(image, source, ImageCms.createProfile("sRGB"),
                                              outputMode=mode)
        except (ImageCms.PyCMSError, OSError, ValueError):
            pass  # an unreadable profile is dropped; the pixels are kept as they are
    if image.mode == "P":
        image = image.convert("RGBA" if "transparency" in image.info else "RGB")
    elif image.mode not in ("RGB", "RGBA", "L", "LA"):
        image = image.convert("RGBA" if "A" in image.mode else "RGB")
    return Image.frombytes(image.mode, image.size, image.tobytes())


def _encode(image, fmt: str) -> bytes:
    out = io.BytesIO()
    if fmt == "JPEG":
        if image.mode not in ("RGB", "L"):
            image = image.convert("RGB")
        image.save(out, "JPEG", quality=85, optimize=True, progressive=True)
    elif fmt == "WEBP":
        image.save(out, "WEBP", quality=85, method=6)
    elif fmt == "GIF":
        image.save(out, "GIF", optimize=True)
    else:
        image.save(out, "PNG", optimize=True)
    return out.getvalue()


def _raster(path: Path, name: str, shown_as: str, fmt: str,
            problems: Problems) -> tuple[dict, list[dict]]:
    from PIL import Image

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", Image.DecompressionBombWarning)
            with Image.open(path) as opened:
                if opened.width * opened.height > MAX_PIXELS:
                    problems.error(shown_as, None, f"image of {opened.width} x {opened.height} "
                                   "pixels is too large to publish",
                                   f"shrink it below {MAX_PIXELS // 1_000_000} megapixels")
                    return {}, []
                opened.load()
                image = _clean(opened)
    except (OSError, ValueError, SyntaxError, Image.DecompressionBombError,
            Image.DecompressionBombWarning) as exc:
        problems.error(shown_as, None, f"cannot be read as an image: {exc}",
                       "open and save it again in an image editor")
        return {}, []
    files = {f"media/{name}": _encode(image, fmt)}
    variants = []
    for width in WIDTHS:
        if width >= image.width:
            break
        height = max(1, round(image.height * width / image.width))
        small = image.resize((width, height), Image.Resampling.LANCZOS)
        target = variant_name(name, width)
        files[f"media/{target}"] = _encode(small, fmt)
        variants.append({"src": target, "width": width, "height": height})
    variants.append({"src": name, "width": image.width, "height": image.height})
    return files, variants


def _publish_raster(_shared: None, task: tuple) -> tuple[tuple[dict, list[dict]], Problems]:
    path, name, shown_as, fmt = task
    problems = Problems()
    return _raster(path, name, shown_as, fmt, problems), problems


def publish_images(atlas: Atlas, cache: Cache | None = None, jobs: int = 1
                   ) -> tuple[dict[str, bytes], dict[str, list[dict]]]:
    """Every published image file (output path -> bytes) and, per original image name, its
    copies for ``srcset`` (``{"src", "width", "height"}``, narrowest first, the image itself
    last; an SVG has none).

    Raster images are made in ``jobs`` forked processes. With a ``cache``, a raster image is
    decoded and encoded again only when its bytes, its name or the Pillow version changed
    (only an image published without a problem is remembered), and the entries of images no
    longer shown are removed. 40 invented 2400 x 1600 photographs, same run
    (``benchmarks/bench_images.py``): 9.8 s in one process, 5.0 s in two, 0.058 s from the
    cache.

    Raises one :class:`AtlasError` listing every image that cannot be published.
    """
    cache = cache or Cache()
    problems = Problems()
    made: dict[str, tuple[dict, list[dict]]] = {}  # per name: (files, variants)
    todo: list[tuple[str, tuple]] = []  # (cache key, task) of the rasters to make
    used: set[str] = set()  # the cache keys of every raster shown
    names = shown_images(atlas)
    for name in names:
        path = atlas.media[name]
        suffix = PurePosixPath(name).suffix.lower()
        shown_as = f"{atlas.config.sources['media']}/{name}"
        if suffix == ".svg":
            data = path.read_bytes()
            check_svg(data, shown_as, problems)
            made[name] = ({f"media/{name}": data}, [])
        elif suffix in RASTER:
            key = ""
            if cache.enabled:
                import PIL

                key = Hasher("published image", name, RASTER[suffix], WIDTHS, PIL.__version__,
                             path.read_bytes()).hexdigest()
                used.add(key)
                stored = cache.get("images", key)
                if isinstance(stored, tuple) and len(stored) == 2:
                    made[name] = stored
                    continue
            todo.append((key, (path, name, shown_as, RASTER[suffix])))
        else:
            problems.error(shown_as, None, f"{suffix or 'a file without an extension'} is not an "
                           "image format browsers show", "use JPEG, PNG, WebP, GIF or SVG")
    results = map_forked(_publish_raster, None, [task for _, task in todo],
                         jobs if len(todo) > 1 else 1)
    for (key, task), (out, found) in zip(todo, results):
        made[task[1]] = out
        problems.extend(found)
        if key and not found.items:
            cache.put("images", key, out, keep=None)
    files: dict[str, bytes] = {}
    variants: dict[str, list[dict]] = {}
    for name in names:
        if name in made:
            files.update(made[name][0])
            variants[name] = made[name][1]
    copies = {f"media/{v['src']}" for sizes in variants.values() for v in sizes[:-1]}
    for clash in sorted(copies & {f"media/{n}" for n in atlas.media}):
        problems.error(clash, None, "a resized copy of another image would replace this file",
                       "rename it (names ending in -<width>w are used for resized copies)")
    problems.raise_if_any()
    if cache.enabled:
        cache.prune("images", used)
    return files, variants


def srcset(variants: list[dict], prefix: str) -> str:
    """The ``srcset`` attribute text: ``prefix`` is the page's path to ``media/``.

    >>> srcset([{"src": "a-160w.png", "width": 160, "height": 90},
    ...         {"src": "a.png", "width": 200, "height": 112}], "../media/")
    '../media/a-160w.png 160w, ../media/a.png 200w'
    """
    return ", ".join(f"{prefix}{v['src']} {v['width']}w" for v in variants)


def _image_fields(image: dict, variants: dict[str, list[dict]], root: str) -> dict:
    media = root + "media/"
    src = image.get("src", "")
    if not src.startswith(media) or src[len(media):] not in variants:
        return image
    sizes = variants[src[len(media):]]
    if not sizes:
        return {**image, "srcset": "", "sizes": "", "width": "", "height": ""}
    default = [v for v in sizes if v["width"] <= DEFAULT_WIDTH] or sizes[:1]
    return {**image, "src": media + default[-1]["src"], "srcset": srcset(sizes, media),
            "sizes": SIZES, "width": sizes[-1]["width"], "height": sizes[-1]["height"],
            "thumbnail": media + sizes[0]["src"]}


def with_srcset(page: PagePlan, variants: dict[str, list[dict]]) -> PagePlan:
    """The page with ``srcset``, ``sizes``, ``width``, ``height`` and ``thumbnail`` added to
    each of its images (``images`` list and ``image`` of a character), as a new PagePlan.

    Templates write ``srcset="{{ im.srcset }}"`` only when it is not empty.
    """
    context = page.context
    root = root_of(page.path)
    changes: dict = {}
    if isinstance(context.get("images"), list) and context.get("kind") == "object":
        changes["images"] = [_image_fields(im, variants, root) for im in context["images"]]
    if isinstance(context.get("image"), dict):
        changes["image"] = _image_fields(context["image"], variants, root)
    if not changes:
        return page
    return replace(page, context={**context, **changes})

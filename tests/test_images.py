"""Published images: metadata stripped (checked by walking the JPEG and PNG structures, not by
asking Pillow), resized copies never upscaled, SVG checked, only shown images published.

The images are made here with Pillow: an invented photograph carrying GPS EXIF, XMP, an ICC
profile and a comment; an invented drawing carrying PNG text chunks.
"""

from __future__ import annotations

import io
import struct

import pytest
from PIL import ExifTags, Image, ImageCms, PngImagePlugin

from atlas.errors import AtlasError
from atlas.site import images
from atlas.site.plan import plan_site

from .test_search import make_atlas

CLEAN_SVG = (b'<svg xmlns="http://www.w3.org/2000/svg" xmlns:xlink="http://www.w3.org/1999/xlink" '
             b'viewBox="0 0 10 10"><defs><linearGradient id="g"><stop offset="0"/>'
             b'</linearGradient></defs><rect width="10" height="10" fill="url(#g)"/>'
             b'<use href="#g"/></svg>\n')
SECRET_PLACE = "found at 31 31 12 S, 15 24 36 W"  # an invented find-spot, hidden in metadata


def photo(width: int = 1500, height: int = 1000, orientation: int = 1) -> bytes:
    image = Image.new("RGB", (width, height), (180, 120, 60))
    exif = Image.Exif()
    exif[ExifTags.Base.Make] = "Invented Camera"
    exif[ExifTags.Base.Orientation] = orientation
    exif[ExifTags.IFD.GPSInfo] = {
        ExifTags.GPS.GPSLatitudeRef: "S", ExifTags.GPS.GPSLatitude: (31.0, 31.0, 12.0),
        ExifTags.GPS.GPSLongitudeRef: "W", ExifTags.GPS.GPSLongitude: (15.0, 24.0, 36.0)}
    icc = ImageCms.ImageCmsProfile(ImageCms.createProfile("sRGB")).tobytes()
    out = io.BytesIO()
    image.save(out, "JPEG", exif=exif.tobytes(), icc_profile=icc, comment=SECRET_PLACE.encode(),
               xmp=f'<x:xmpmeta xmlns:x="adobe:ns:meta/">{SECRET_PLACE}</x:xmpmeta>'.encode())
    return out.getvalue()


def drawing(width: int = 400, height: int = 300) -> bytes:
    image = Image.new("RGBA", (width, height), (20, 60, 120, 255))
    info = PngImagePlugin.PngInfo()
    info.add_text("Comment", SECRET_PLACE)
    info.add_text("Location", SECRET_PLACE, zip=True)  # a zTXt chunk
    info.add_itxt("Description", SECRET_PLACE, lang="en")
    out = io.BytesIO()
    image.save(out, "PNG", pnginfo=info)
    return out.getvalue()


def jpeg_segments(data: bytes) -> list[int]:
    """The JPEG marker bytes before the scan (ITU-T T.81, Annex B)."""
    assert data[:2] == b"\xff\xd8"
    markers, i = [], 2
    while i < len(data):
        assert data[i] == 0xFF
        marker = data[i + 1]
        if marker == 0xDA:  # start of scan: the image data follows
            break
        length = struct.unpack(">H", data[i + 2:i + 4])[0]
        markers.append(marker)
        i += 2 + length
    return markers


def png_chunks(data: bytes) -> list[bytes]:
    """The chunk types of a PNG file (PNG specification, section 5)."""
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    types, i = [], 8
    while i < len(data):
        length = struct.unpack(">I", data[i:i + 4])[0]
        types.append(data[i + 4:i + 8])
        i += 12 + length
    return types


def image_atlas(folder, extra=None):
    files = {
        "media/photo.jpg": photo(),
        "media/drawing.png": drawing(),
        "media/turned.jpg": photo(300, 200, orientation=6),
        "media/secret.jpg": photo(200, 100),
        "media/unused.png": drawing(50, 50),
        "media/bowl.svg": CLEAN_SVG,
        "objects/spoon-a.md": (
            "---\nid: spoon-a\ntitle: Spoon with hooked handle\nplace: brinmoor\n"
            "access: public\nimages:\n"
            "  - {file: photo.jpg, alt: The spoon from above, credit: Invented, licence: CC0}\n"
            "  - {file: drawing.png, alt: A drawing of the hook, credit: Invented}\n"
            "---\nA spoon (invented). ![turned](media:turned.jpg)\n"),
        "objects/spoon-d.md": (
            "---\nid: spoon-d\ntitle: Deep spoon with notched rim\nplace: calder-end\n"
            "access: public\n---\nA deep spoon (invented).\n"),
        "objects/spoon-c.md": (
            "---\nid: spoon-c\ntitle: Restricted spoon\naccess: restricted\nimages:\n"
            "  - {file: secret.jpg, alt: Restricted, credit: Invented}\n---\nRestricted.\n"),
        "characters/bowl.md": (
            "---\nid: bowl\nlabel: Bowl depth\ngroup: Bowl\nordered: true\nstates:\n"
            '  "0": shallow\n  "1": deep\n  "2": very deep\n'
            "image: {file: bowl.svg, alt: Three bowl depths, credit: Invented}\n---\n"),
        **(extra or {}),
    }
    return make_atlas(folder, extra=files)


@pytest.fixture(scope="module")
def published(tmp_path_factory):
    atlas, results = image_atlas(tmp_path_factory.mktemp("images") / "atlas")
    files, variants = images.publish_images(atlas)
    return atlas, results, files, variants


def test_the_inputs_do_carry_metadata():
    """The check below can fail: the source images hold GPS EXIF, XMP, ICC and text chunks."""
    source = photo()
    assert Image.open(io.BytesIO(source)).getexif().get_ifd(ExifTags.IFD.GPSInfo)
    assert {0xE1, 0xE2, 0xFE} <= set(jpeg_segments(source))  # APP1 (EXIF, XMP), APP2, COM
    assert {b"tEXt", b"zTXt", b"iTXt"} <= set(png_chunks(drawing()))


def test_published_rasters_carry_no_metadata(published):
    _, _, files, _ = published
    rasters = {p: b for p, b in files.items() if not p.endswith(".svg")}
    assert len(rasters) > 4
    for path, data in rasters.items():
        assert SECRET_PLACE.encode() not in data, path
        opened = Image.open(io.BytesIO(data))
        assert not opened.getexif(), path
        assert not {"exif", "xmp", "icc_profile", "comment", "Comment"} & set(opened.info), path
        if path.endswith(".jpg"):
            # only JFIF APP0, tables and frame headers: no APP1-APP15, no comment (T.81)
            assert all(m == 0xE0 or not (0xE1 <= m <= 0xEF or m == 0xFE)
                       for m in jpeg_segments(data)), path
        else:
            chunks = set(png_chunks(data))
            assert not {b"tEXt", b"zTXt", b"iTXt", b"eXIf", b"iCCP", b"tIME"} & chunks, path


def test_resized_copies_are_never_upscaled(published):
    _, _, files, variants = published
    # photo.jpg is 1500 x 1000: 160, 320, 640, 1280 and itself; heights round(1000 * w / 1500)
    assert [(v["width"], v["height"]) for v in variants["photo.jpg"]] == [
        (160, 107), (320, 213), (640, 427), (1280, 853), (1500, 1000)]
    # drawing.png is 400 x 300: only 160 and 320 are smaller
    assert [v["width"] for v in variants["drawing.png"]] == [160, 320, 400]
    for sizes in variants.values():
        for v in sizes:
            with Image.open(io.BytesIO(files[f"media/{v['src']}"])) as im:
                assert im.size == (v["width"], v["height"])
    assert variants["bowl.svg"] == []


def test_exif_orientation_is_applied_before_it_is_stripped(published):
    _, _, files, variants = published
    # orientation 6 (rotate 90 degrees clockwise to view): a 300 x 200 photo stands 200 x 300
    assert Image.open(io.BytesIO(files["media/turned.jpg"])).size == (200, 300)
    assert variants["turned.jpg"][-1]["width"] == 200


def test_only_images_that_published_pages_show(published):
    _, _, files, _ = published
    names = {p.split("/", 1)[1] for p in files}
    assert {"photo.jpg", "drawing.png", "turned.jpg", "bowl.svg"} <= names  # turned: in a note
    assert "secret.jpg" not in names and "unused.png" not in names
    assert not any(n.startswith(("secret", "unused")) for n in names)


def test_clean_svg_is_copied_as_it_is(published):
    _, _, files, _ = published
    assert files["media/bowl.svg"] == CLEAN_SVG


@pytest.mark.parametrize("bad", [
    b'<svg xmlns="http://www.w3.org/2000/svg"><script>alert(1)</script></svg>',
    b'<svg xmlns="http://www.w3.org/2000/svg" onload="alert(1)"></svg>',
    b'<svg xmlns="http://www.w3.org/2000/svg"><image href="https://x.example/a.png"/></svg>',
    b'<svg xmlns="http://www.w3.org/2000/svg"><use xlink:href="other.svg#a"/></svg>',
    b'<svg xmlns="http://www.w3.org/2000/svg"><rect style="fill:url(http://x.example/p)"/></svg>',
    b'<svg xmlns="http://www.w3.org/2000/svg"><style>@import "x.css";</style></svg>',
    b'<svg xmlns="http://www.w3.org/2000/svg"><foreignObject><p>x</p></foreignObject></svg>',
])
def test_svg_that_could_do_more_than_draw_is_refused(bad):
    problems = images.Problems()
    images.check_svg(bad, "media/bad.svg", problems)
    assert [p.file for p in problems.errors] == ["media/bad.svg"]
    good = images.Problems()
    images.check_svg(CLEAN_SVG, "media/good.svg", good)
    assert not good.items


def test_every_bad_image_is_listed_at_once(tmp_path):
    atlas, _ = image_atlas(tmp_path / "atlas", {
        "media/photo.jpg": b"\xff\xd8 this is not a photograph",
        "media/bowl.svg": b'<svg xmlns="http://www.w3.org/2000/svg" onclick="x()"/>',
    })
    with pytest.raises(AtlasError) as caught:
        images.publish_images(atlas)
    files = sorted(p.file for p in caught.value.problems)
    assert files == ["media/bowl.svg", "media/photo.jpg"]


def test_srcset_for_the_object_page(published):
    atlas, results, files, variants = published
    plan = plan_site(atlas, results)
    # plan_site applies with_srcset to every page it plans
    shown = next(p for p in plan.pages if p.path == "objects/spoon-a.html")
    photo_entry = shown.context["images"][0]
    assert photo_entry["src"] == "../media/photo-640w.jpg"  # the largest copy up to 640 px
    assert photo_entry["srcset"].split(", ") == [
        "../media/photo-160w.jpg 160w", "../media/photo-320w.jpg 320w",
        "../media/photo-640w.jpg 640w", "../media/photo-1280w.jpg 1280w",
        "../media/photo.jpg 1500w"]
    for part in photo_entry["srcset"].split(", "):
        assert f"media/{part.split()[0][len('../media/'):]}" in files
    assert (photo_entry["width"], photo_entry["height"]) == (1500, 1000)
    character = next(p for p in plan.pages if p.path == "characters/bowl.html")
    assert character.context["image"]["srcset"] == ""


def test_publishing_is_deterministic(published):
    atlas, _, files, variants = published
    assert images.publish_images(atlas) == (files, variants)


def test_the_cache_spares_encoding_unchanged_images_and_forgets_replaced_ones(
        tmp_path, monkeypatch):
    from atlas.cache import Cache

    cache = Cache(tmp_path / "cache")
    calls = []
    real = images._raster
    monkeypatch.setattr(images, "_raster",
                        lambda path, name, *rest: calls.append(name) or real(path, name, *rest))
    atlas, _ = image_atlas(tmp_path / "a")
    first = images.publish_images(atlas, cache)
    assert sorted(calls) == ["drawing.png", "photo.jpg", "turned.jpg"]
    assert first == images.publish_images(atlas)  # the same as with no cache
    calls.clear()
    assert images.publish_images(atlas, cache) == first
    assert calls == []  # nothing decoded or encoded again
    # another photograph under the same name: that one alone is encoded, the old entry goes
    # (the other images are copied: photo() embeds an ICC profile that carries its time)
    same = {f"media/{p.name}": p.read_bytes() for p in (tmp_path / "a" / "media").iterdir()}
    atlas, _ = image_atlas(tmp_path / "b", {**same, "media/photo.jpg": photo(900, 600)})
    files, variants = images.publish_images(atlas, cache)
    assert calls == ["photo.jpg"]
    assert variants["photo.jpg"][-1] == {"src": "photo.jpg", "width": 900, "height": 600}
    assert len(list((tmp_path / "cache" / "images").glob("*.pickle"))) == 3


def test_an_image_that_cannot_be_published_is_refused_again_with_a_cache(tmp_path):
    from atlas.cache import Cache

    cache = Cache(tmp_path / "cache")
    atlas, _ = image_atlas(tmp_path / "atlas", {"media/photo.jpg": b"\xff\xd8 not a photo"})
    for _ in range(2):
        with pytest.raises(AtlasError) as caught:
            images.publish_images(atlas, cache)
        assert [p.file for p in caught.value.problems] == ["media/photo.jpg"]


def test_images_made_in_two_processes_are_the_same(published):
    atlas, _, files, variants = published
    assert images.publish_images(atlas, jobs=2) == (files, variants)

"""Check that a figure file is what its name says, and its size.

    figure_check.py FILE WIDTH HEIGHT

PNG: the file is decoded with zlib and struct after the PNG specification
(ISO/IEC 15948, W3C PNG 2nd edition): signature, IHDR width and height in
pixels, every chunk's CRC-32, the IDAT stream inflating to exactly
height * (1 + width * bytes per pixel) bytes, and not one colour only.
PDF: the header, the %%EOF trailer and the page's /MediaBox [0 0 W H] in
points (ISO 32000-1, 7.7.3.3).
SVG: parsed by xml.etree as SVG (root element svg in the SVG namespace,
W3C SVG 1.1), width and height attributes "Wpt" and "Hpt", and at least one
drawn element.
Prints one line "ok ..." and exits 0, or prints the problem and exits 1."""
import re
import struct
import sys
import zlib
import xml.etree.ElementTree as ET


def png(path, w, h):
    b = open(path, "rb").read()
    assert b[:8] == b"\x89PNG\r\n\x1a\n", "no PNG signature"
    pos, idat, ihdr = 8, b"", None
    while pos < len(b):
        n, typ = struct.unpack(">I4s", b[pos:pos + 8])
        data = b[pos + 8:pos + 8 + n]
        crc = struct.unpack(">I", b[pos + 8 + n:pos + 12 + n])[0]
        assert zlib.crc32(typ + data) & 0xffffffff == crc, "bad CRC in %s" % typ
        if typ == b"IHDR":
            ihdr = struct.unpack(">IIBBBBB", data)
        elif typ == b"IDAT":
            idat += data
        pos += 12 + n
        if typ == b"IEND":
            break
    assert ihdr, "no IHDR"
    width, height, depth, ctype = ihdr[:4]
    assert (width, height) == (w, h), "size %dx%d, not %dx%d" % (width, height, w, h)
    channels = {0: 1, 2: 3, 3: 1, 4: 2, 6: 4}[ctype]
    raw = zlib.decompress(idat)
    stride = 1 + width * channels * depth // 8
    assert len(raw) == height * stride, "image data of %d bytes, not %d" % (len(raw), height * stride)
    # the rows' filter bytes are 0..4 and the picture is not blank
    assert all(raw[r * stride] <= 4 for r in range(height)), "bad filter byte"
    assert len(set(raw[r * stride + 1:(r + 1) * stride] for r in range(0, height, 7))) > 3, "a blank image"
    return "PNG %dx%d pixels, %d-bit, colour type %d" % (width, height, depth, ctype)


def pdf(path, w, h):
    b = open(path, "rb").read()
    assert b.startswith(b"%PDF-1."), "no PDF header"
    assert b.rstrip().endswith(b"%%EOF"), "no %%EOF trailer"
    boxes = re.findall(rb"/MediaBox\s*\[\s*([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s+([-\d.]+)\s*\]", b)
    assert boxes, "no /MediaBox"
    x0, y0, x1, y1 = map(float, boxes[0])
    assert (x0, y0) == (0, 0) and abs(x1 - w) < 0.01 and abs(y1 - h) < 0.01, "MediaBox %s" % (boxes[0],)
    pages = len(re.findall(rb"/Type\s*/Page[^s]", b))
    assert pages == 1, "%d pages" % pages
    return "PDF page %gx%g pt" % (x1, y1)


def svg(path, w, h):
    root = ET.parse(path).getroot()
    assert root.tag == "{http://www.w3.org/2000/svg}svg", "root is %s" % root.tag
    for attr, want in (("width", w), ("height", h)):
        v = root.get(attr)
        assert v and v.endswith("pt") and abs(float(v[:-2]) - want) < 0.01, "%s=%s" % (attr, v)
    drawn = [e for e in root.iter() if e.tag.split("}")[1] in ("path", "use", "rect", "text", "g")]
    assert len(drawn) > 10, "only %d elements" % len(drawn)
    return "SVG %sx%s, %d elements" % (root.get("width"), root.get("height"), len(drawn))


def main():
    path, w, h = sys.argv[1], float(sys.argv[2]), float(sys.argv[3])
    kind = path.rsplit(".", 1)[-1].lower()
    try:
        fn = {"png": png, "pdf": pdf, "svg": svg}[kind]
        msg = fn(path, int(w) if kind == "png" else w, int(h) if kind == "png" else h)
    except (AssertionError, ET.ParseError, KeyError, struct.error, zlib.error) as e:
        print("%s: %s" % (path, e))
        return 1
    print("ok %s: %s" % (path, msg))
    return 0


sys.exit(main())

"""Colour tags and catalog metadata for the files a render writes.

Every image leaves ``shots`` as sRGB (``shots.colour``), and every file says so:

* PNG: the ``sRGB`` chunk with the ``gAMA`` and ``cHRM`` chunks that go with it (PNG spec
  §11.3.3.5, "sRGB"; the values are those of IEC 61966-2-1), plus text chunks for metadata;
* JPEG, WebP and AVIF: an embedded sRGB ICC profile (made by LittleCMS through Pillow's
  ``ImageCms``), and the metadata as EXIF and XMP.

Metadata (``ImageMetadata``) is what a catalog needs to trace a file back: product code, title,
variant and a copyright line.
"""

from __future__ import annotations

import functools
import hashlib
import struct
import zlib
from dataclasses import dataclass
from xml.sax.saxutils import escape

import shots

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
IHDR_END = len(PNG_SIGNATURE) + 8 + 13 + 4  # signature, IHDR length/type, 13 data bytes, CRC

# sRGB in PNG (PNG spec §11.3.3.5 and §12.2 "Recommendations for encoders"): rendering intent 0
# (perceptual, the usual choice for photographs: common practice), with the gAMA and cHRM
# chunks a decoder without sRGB support falls back on.
SRGB_INTENT_PERCEPTUAL = 0
SRGB_GAMMA = 45455  # 1/2.2 × 100000, the value the PNG spec gives for sRGB images
# White point D65 and the Rec.709 primaries as CIE xy (IEC 61966-2-1 Table 1), × 100000
SRGB_CHROMATICITY = (31270, 32900, 64000, 33000, 30000, 60000, 15000, 6000)

# EXIF tags (EXIF 2.32, Table 4 "Tag Support Levels"): 0th IFD text fields
EXIF_IMAGE_DESCRIPTION = 0x010E
EXIF_SOFTWARE = 0x0131
EXIF_COPYRIGHT = 0x8298


@dataclass(frozen=True)
class ImageMetadata:
    """What a published file says about itself; empty fields are left out of the file."""

    product_code: str = ""
    title: str = ""
    variant: str = ""
    copyright: str = ""

    def as_dict(self) -> dict[str, str]:
        return {"product_code": self.product_code, "title": self.title, "variant": self.variant,
                "copyright": self.copyright}

    @property
    def description(self) -> str:
        """One line: "CODE - title - variant" for the fields that are set."""
        return " - ".join(p for p in (self.product_code, self.title, self.variant) if p)


NO_METADATA = ImageMetadata()


# --- PNG ------------------------------------------------------------------------------------


def png_chunk(kind: bytes, data: bytes) -> bytes:
    """One PNG chunk: length, type, data, CRC-32 of type and data (PNG spec §5.3)."""
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))


def srgb_png_chunks() -> bytes:
    """The sRGB, gAMA and cHRM chunks of an sRGB image."""
    return (png_chunk(b"sRGB", bytes([SRGB_INTENT_PERCEPTUAL]))
            + png_chunk(b"gAMA", struct.pack(">I", SRGB_GAMMA))
            + png_chunk(b"cHRM", struct.pack(">8I", *SRGB_CHROMATICITY)))


def text_png_chunks(metadata: ImageMetadata) -> bytes:
    """International text chunks (iTXt, PNG spec §11.3.4.5, UTF-8, uncompressed).

    Title, Copyright, Description and Software are keywords the PNG spec predefines
    (§11.3.4.2); "Product code" and "Variant" are our own.
    """
    fields = {"Title": metadata.title, "Copyright": metadata.copyright,
              "Description": metadata.description, "Product code": metadata.product_code,
              "Variant": metadata.variant, "Software": f"shots {shots.__version__}"}
    return b"".join(
        png_chunk(b"iTXt", keyword.encode("latin-1") + b"\0\0\0\0\0" + text.encode("utf-8"))
        for keyword, text in fields.items() if text
    )


def tag_png(data: bytes, metadata: ImageMetadata | None = None) -> bytes:
    """PNG bytes with the sRGB chunks (and metadata text) placed right after IHDR.

    The colour chunks must come before PLTE and IDAT (PNG spec §5.6); IHDR is always first.
    """
    if not data.startswith(PNG_SIGNATURE) or data[12:16] != b"IHDR":
        raise ValueError("not a PNG stream")
    extra = srgb_png_chunks() + (text_png_chunks(metadata) if metadata else b"")
    return data[:IHDR_END] + extra + data[IHDR_END:]


# --- JPEG, WebP, AVIF -------------------------------------------------------------------------


# A fixed creation date for the profile (ICC.1:2010 §7.2.1 dateTimeNumber: six uint16), so
# every process embeds the same bytes and reruns stay byte-identical.
ICC_DATE = struct.pack(">6H", 2026, 1, 1, 0, 0, 0)


@functools.cache
def srgb_icc_profile() -> bytes:
    """An sRGB ICC profile: LittleCMS's built-in sRGB (through Pillow's ImageCms), with a
    fixed creation date and its profile ID recomputed.

    LittleCMS stamps the time of creation into the header (bytes 24–35), which would make
    every run's files differ. The profile ID (bytes 84–99) is the MD5 of the profile with the
    flags, rendering intent and ID fields set to zero (ICC.1:2010 §7.2.18).
    """
    from PIL import ImageCms

    data = bytearray(ImageCms.ImageCmsProfile(ImageCms.createProfile("sRGB")).tobytes())
    data[24:36] = ICC_DATE
    zeroed = bytearray(data)
    zeroed[44:48] = zeroed[64:68] = bytes(4)
    zeroed[84:100] = bytes(16)
    data[84:100] = hashlib.md5(zeroed).digest()
    return bytes(data)


def exif_bytes(metadata: ImageMetadata) -> bytes:
    """An EXIF block with description, copyright and software.

    EXIF text fields are ASCII (EXIF 2.32 §4.6.2), so "©" becomes "(c)" and other characters
    outside ASCII become "?"; the XMP packet carries the exact text.
    """
    from PIL import Image

    exif = Image.Exif()
    exif[EXIF_SOFTWARE] = f"shots {shots.__version__}"
    if metadata.description:
        exif[EXIF_IMAGE_DESCRIPTION] = _ascii(metadata.description)
    if metadata.copyright:
        exif[EXIF_COPYRIGHT] = _ascii(metadata.copyright)
    return exif.tobytes()


def _ascii(text: str) -> str:
    return text.replace("©", "(c)").encode("ascii", "replace").decode("ascii")


def xmp_packet(metadata: ImageMetadata) -> bytes:
    """An XMP packet (ISO 16684-1) with Dublin Core title, identifier, description and rights."""
    properties = []
    for name, text in (("title", metadata.title), ("rights", metadata.copyright),
                       ("description", metadata.description)):
        if text:  # language alternatives, as Dublin Core in XMP defines these three
            properties.append(f"<dc:{name}><rdf:Alt><rdf:li xml:lang=\"x-default\">"
                              f"{escape(text)}</rdf:li></rdf:Alt></dc:{name}>")
    if metadata.product_code:
        properties.append(f"<dc:identifier>{escape(metadata.product_code)}</dc:identifier>")
    body = "".join(properties)
    return (
        '<?xpacket begin="\ufeff" id="W5M0MpCehiHzreSzNTczkc9d"?>'
        '<x:xmpmeta xmlns:x="adobe:ns:meta/">'
        '<rdf:RDF xmlns:rdf="http://www.w3.org/1999/02/22-rdf-syntax-ns#">'
        '<rdf:Description rdf:about="" xmlns:dc="http://purl.org/dc/elements/1.1/">'
        f"{body}</rdf:Description></rdf:RDF></x:xmpmeta>"
        '<?xpacket end="r"?>'
    ).encode()

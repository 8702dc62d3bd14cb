"""Colour-managed test images and their CIELAB reference values.

Writes into fixtures/profiles/:
- display-p3.icc, wide-gamut.icc: ICC v2 matrix/TRC display profiles built here from
  published primaries (Display P3: SMPTE EG 432-1 primaries, D65 white, the IEC 61966-2-1
  sRGB curve; wide gamut: the primaries and D50 white colour-science lists as
  'Adobe Wide Gamut RGB', gamma 563/256). Colorants are adapted to the D50 connection
  space with Bradford, as ICC.1 asks.
- p3.png, p3.tif, p3.webp (lossless) and p3.jpg (quality 95, no chroma subsampling): 12 flat
  8 x 8 patches tagged with display-p3.icc; wide.png tagged with wide-gamut.icc. The PNG
  and JPEG also carry EXIF (orientation 6, a make) and 300 dpi.
- grey-gamma.icc, grey.png: an ICC v2 grey (GRAY colour space, grayTRC) display profile with
  a gamma of 563/256 (2.2 as the u8Fixed8 a curv tag stores), and a greyscale PNG of 8
  flat 8 x 8 grey patches tagged with it.
- lab_reference.csv: per patch, the RGB numbers and the CIELAB (D65 white, CIE 1931 2°)
  that colour-science 0.4.7 computes for them from the same primaries: decoding curve,
  RGB -> XYZ (Bradford to D65 for the D50-white space), XYZ -> Lab. A grey patch is the
  achromatic colour of luminance Y = decode(v), the white point scaled by Y (ICC.1 F.2:
  the grey TRC gives the connection space's Y; the media white is D65 once adapted), so
  a* = b* = 0. Column srgb_hex: the 8-bit sRGB colour colour-science gives for that CIELAB
  (XYZ -> sRGB, each channel clipped to 0..1, rounded), what a palette holding the patch
  should hold. Column written_hex: that sRGB colour as 8-bit numbers of the patch's own
  space (sRGB decoding, XYZ, Bradford to the space's white, the space's RGB clipped to 0..1,
  its encoding curve, rounded), what a reduced image written in the source profile holds
  for the patch; '-' for the grey patches.

Regenerate: python3 tests/reference/make_profile_fixtures.py
"""
import io
import struct
from pathlib import Path

import colour
import numpy as np
from PIL import Image

OUT = Path(__file__).resolve().parents[2] / "fixtures" / "profiles"
D50_ICC = np.array([0.9642, 1.0, 0.8249])


def s15f16(v):
    return struct.pack(">i", int(round(v * 65536)))


def xyz_tag(xyz):
    return b"XYZ " + b"\0" * 4 + b"".join(s15f16(v) for v in xyz)


def desc_tag(text):
    a = text.encode("ascii") + b"\0"
    return (b"desc" + b"\0" * 4 + struct.pack(">I", len(a)) + a
            + struct.pack(">II", 0, 0) + struct.pack(">HB", 0, 0) + b"\0" * 67)


def text_tag(text):
    return b"text" + b"\0" * 4 + text.encode("ascii") + b"\0"


def para_srgb():
    # Function type 3: Y = (aX + b)^g for X >= d, else cX (IEC 61966-2-1).
    g, a, b, c, d = 2.4, 1 / 1.055, 0.055 / 1.055, 1 / 12.92, 0.04045
    return b"para" + b"\0" * 4 + struct.pack(">HH", 3, 0) + b"".join(s15f16(v) for v in (g, a, b, c, d))


def curv_gamma(gamma):
    return b"curv" + b"\0" * 4 + struct.pack(">I", 1) + struct.pack(">H", int(round(gamma * 256)))


def icc_profile(name, colorants_d50, trc):
    tags = [(b"desc", desc_tag(name)), (b"cprt", text_tag("No copyright, test data")),
            (b"wtpt", xyz_tag(D50_ICC)),
            (b"rXYZ", xyz_tag(colorants_d50[:, 0])), (b"gXYZ", xyz_tag(colorants_d50[:, 1])),
            (b"bXYZ", xyz_tag(colorants_d50[:, 2])),
            (b"rTRC", trc), (b"gTRC", trc), (b"bTRC", trc)]
    return icc_bytes(tags, b"RGB ")


def icc_grey_profile(name, trc):
    # ICC.1 8.3 (monochrome input) and 8.4 (display) profiles: grayTRC, signature 'kTRC'.
    tags = [(b"desc", desc_tag(name)), (b"cprt", text_tag("No copyright, test data")),
            (b"wtpt", xyz_tag(D50_ICC)), (b"kTRC", trc)]
    return icc_bytes(tags, b"GRAY")


def icc_bytes(tags, colour_space):
    offset = 128 + 4 + 12 * len(tags)
    table, data = b"", b""
    for sig, body in tags:
        while (offset + len(data)) % 4:
            data += b"\0"
        table += sig + struct.pack(">II", offset + len(data), len(body))
        data += body
    while len(data) % 4:
        data += b"\0"
    size = offset + len(data)
    header = (struct.pack(">I", size) + b"\0" * 4 + struct.pack(">I", 0x02100000) + b"mntr" + colour_space + b"XYZ "
              + struct.pack(">6H", 2026, 12, 3, 0, 0, 0) + b"acsp" + b"\0" * 4 + b"\0" * 4
              + b"\0" * 4 + b"\0" * 4 + b"\0" * 8 + b"\0" * 4
              + b"".join(s15f16(v) for v in D50_ICC) + b"\0" * 4 + b"\0" * 16 + b"\0" * 28)
    assert len(header) == 128
    return header + struct.pack(">I", len(tags)) + table + data


def colorants_d50(space):
    m = space.matrix_RGB_to_XYZ
    white_xyz = colour.xy_to_XYZ(space.whitepoint)
    cat = colour.adaptation.matrix_chromatic_adaptation_VonKries(white_xyz, D50_ICC, "Bradford")
    return cat @ m


# 12 patches: primaries and secondaries at full strength (outside sRGB for these spaces),
# greys, and mid colours.
PATCHES = [(255, 0, 0), (0, 255, 0), (0, 0, 255), (255, 255, 0), (0, 255, 255), (255, 0, 255),
           (255, 255, 255), (128, 128, 128), (20, 20, 20), (200, 120, 60), (60, 140, 200), (90, 180, 70)]


def patch_image():
    img = np.zeros((24, 32, 3), np.uint8)
    for i, c in enumerate(PATCHES):
        y, x = divmod(i, 4)
        img[y * 8:(y + 1) * 8, x * 8:(x + 1) * 8] = c
    return Image.fromarray(img, "RGB")


GREYS = [0, 20, 50, 90, 128, 170, 220, 255]


def grey_image():
    img = np.zeros((16, 32), np.uint8)
    for i, v in enumerate(GREYS):
        y, x = divmod(i, 4)
        img[y * 8:(y + 1) * 8, x * 8:(x + 1) * 8] = v
    return Image.fromarray(img, "L")


def srgb_hex(lab):
    d65 = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"]
    rgb = colour.XYZ_to_sRGB(colour.Lab_to_XYZ(lab, d65), d65)
    c = np.round(np.clip(rgb, 0.0, 1.0) * 255).astype(int)
    return "#%02x%02x%02x" % tuple(c)


def written_hex(srgb, space, encode):
    d65 = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"]
    xyz = colour.sRGB_to_XYZ(np.asarray(srgb, float) / 255.0, d65)
    lin = colour.XYZ_to_RGB(xyz, space, illuminant=d65, chromatic_adaptation_transform="Bradford",
                            apply_cctf_encoding=False)
    c = np.round(encode(np.clip(lin, 0.0, 1.0)) * 255).astype(int)
    return "#%02x%02x%02x" % tuple(c)


def reference_lab(space, rgb8, decode):
    rgb = np.asarray(rgb8, float) / 255.0
    lin = decode(rgb)
    d65 = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"]
    xyz = colour.RGB_to_XYZ(lin, space, illuminant=d65, chromatic_adaptation_transform="Bradford",
                            apply_cctf_decoding=False)
    return colour.XYZ_to_Lab(xyz, d65)


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    p3 = colour.RGB_COLOURSPACES["Display P3"]
    wide = colour.RGB_COLOURSPACES["Adobe Wide Gamut RGB"]
    p3_icc = icc_profile("chromasift test Display P3", colorants_d50(p3), para_srgb())
    wide_icc = icc_profile("chromasift test wide gamut", colorants_d50(wide), curv_gamma(563 / 256))
    (OUT / "display-p3.icc").write_bytes(p3_icc)
    (OUT / "wide-gamut.icc").write_bytes(wide_icc)

    exif = Image.Exif()
    exif[0x0112] = 6  # orientation: rotate 90° clockwise to view
    exif[0x010F] = "chromasift test"
    img = patch_image()
    img.save(OUT / "p3.png", icc_profile=p3_icc, exif=exif.tobytes(), dpi=(300, 300))
    img.save(OUT / "p3.jpg", quality=95, subsampling=0, icc_profile=p3_icc, exif=exif.tobytes(),
             dpi=(300, 300))
    img.save(OUT / "p3.tif", icc_profile=p3_icc)
    img.save(OUT / "p3.webp", lossless=True, icc_profile=p3_icc)
    img.save(OUT / "wide.png", icc_profile=wide_icc)
    grey_gamma = 563 / 256
    grey_icc = icc_grey_profile("chromasift test grey gamma 2.2", curv_gamma(grey_gamma))
    (OUT / "grey-gamma.icc").write_bytes(grey_icc)
    grey_image().save(OUT / "grey.png", icc_profile=grey_icc)
    back = Image.open(OUT / "grey.png")
    assert back.mode == "L" and back.info["icc_profile"] == grey_icc

    rows = ["space,patch,r,g,b,L,a,b_,srgb_hex,written_hex"]
    for name, space, decode, encode in [
            ("display-p3", p3, colour.models.eotf_sRGB, colour.models.eotf_inverse_sRGB),
            ("wide-gamut", wide, lambda v: np.power(v, 563 / 256), lambda v: np.power(v, 256 / 563))]:
        for i, c in enumerate(PATCHES):
            lab = reference_lab(space, c, decode)
            hex_ = srgb_hex(lab)
            srgb = [int(hex_[k:k + 2], 16) for k in (1, 3, 5)]
            rows.append(f"{name},{i},{c[0]},{c[1]},{c[2]},{lab[0]!r},{lab[1]!r},{lab[2]!r},"
                        f"{hex_},{written_hex(srgb, space, encode)}")
    d65 = colour.CCS_ILLUMINANTS["CIE 1931 2 Degree Standard Observer"]["D65"]
    for i, v in enumerate(GREYS):
        y = np.power(v / 255.0, grey_gamma)
        lab = colour.XYZ_to_Lab(y * colour.xy_to_XYZ(d65), d65)
        rows.append(f"grey-gamma,{i},{v},{v},{v},{lab[0]!r},{lab[1]!r},{lab[2]!r},{srgb_hex(lab)},-")
    header = ("# CIELAB (D65, CIE 1931 2 degree) of each patch, by colour-science "
              f"{colour.__version__} from the published primaries (see the script)\n"
              "# regenerate: python3 tests/reference/make_profile_fixtures.py\n")
    (OUT / "lab_reference.csv").write_text(header + "\n".join(rows) + "\n")


if __name__ == "__main__":
    main()

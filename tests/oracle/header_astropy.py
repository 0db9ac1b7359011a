"""Reference values for cairn's header reading (src/header.rs, src/map.rs, src/wcs) from
astropy 8.0.2: astropy.io.fits for string values continued on CONTINUE cards, astropy.units
for the length units of wavelength keywords, and astropy.wcs for the case of CTYPE values.

Run as `python tests/oracle/header_astropy.py OUTDIR`; writes OUTDIR/header/.

* long_strings.fits: a FITS file assembled here card by card (FITS Standard 4.0: 2880-byte
  blocks of 80-character cards, big-endian 32-bit floats) whose primary image has
  BUNIT = 'MJy/&' continued by CONTINUE 'sr', and an OBJECT continued over three cards with
  a comment on each, a doubled quote and blanks before an '&'; then two image extensions
  written by astropy, the first with an EXTNAME of 74 characters (which astropy writes on
  CONTINUE cards), the second with a short one. Pixel values are invented.
* long_strings.json: what astropy.io.fits reads from that file (each HDU's EXTNAME, BUNIT,
  OBJECT and its comment, and its pixels), and the card images astropy writes for string
  values of several lengths (with doubled quotes, one pair ending at the place where a value
  is cut).
* wavelength_units.json: metres per unit, from astropy.units, of the length units cairn reads
  in the comment of WAVELEN/WAVELNTH; and header cards of wavelength keywords (RESTFRQ and
  the like in Hz, WAVELEN/WAVELNTH with a unit in the comment), each with the wavelength in
  metres that astropy.units gives for the value in the unit the card names (the unit read
  here from the comment's brackets, or named in the case), or null where astropy cannot
  convert the unit to a length or the wavelength lies outside 1 um to 10 m (cairn's stated
  range for wavelengths from a header).
* ctype_pairs.json: pairs of CTYPEs with and without projection codes, and whether astropy
  finds a celestial pair in them (or refuses the header).
* ctype_case.json: a TAN header in upper case and the same in lower case; whether
  astropy.wcs.WCS reads each (the lower case is refused), and astropy's pixel -> sky of the
  upper-case one on a few pixels.
"""
import os

import numpy as np
import astropy
import astropy.units as u
from astropy.io import fits
from astropy.wcs import WCS

from common import out_dir, write_json

OUT = out_dir("header")


def card(text):
    assert len(text) <= 80, text
    return f"{text:<80}"


def fits_file(cards, pixels):
    """A primary HDU from card texts and a 2-D float32 array (big-endian), padded to blocks."""
    ny, nx = pixels.shape
    head = [card("SIMPLE  =                    T"), card("BITPIX  =                  -32"),
            card("NAXIS   =                    2"), card(f"NAXIS1  = {nx:>20}"),
            card(f"NAXIS2  = {ny:>20}"), card("EXTEND  =                    T")]
    head += [card(c) for c in cards] + [card("END")]
    text = "".join(head)
    text += " " * (-len(text) % 2880)
    data = pixels.astype(">f4").tobytes()
    data += b"\0" * (-len(data) % 2880)
    return text.encode("ascii") + data


def long_strings():
    path = os.path.join(OUT, "long_strings.fits")
    primary = np.arange(12, dtype=np.float32).reshape(3, 4) * 0.5
    cards = [
        "BUNIT   = 'MJy/&'",
        "CONTINUE  'sr'",
        "OBJECT  = 'a cloud''s core &'  / first part",
        "CONTINUE  'seen in two  &' / second part",
        "CONTINUE  'bands'  / last part",
    ]
    long_name = "A" * 30 + "-" + "B" * 30 + "-extension-14"
    assert len(long_name) > 68
    ext1 = fits.ImageHDU(np.full((4, 5), 7.0, dtype=np.float32), name=long_name)
    ext1.header["BUNIT"] = "MJy/sr"
    ext2 = fits.ImageHDU(np.full((4, 5), 3.0, dtype=np.float32), name="SHORT")
    ext2.header["BUNIT"] = "MJy/sr"
    with open(path, "wb") as f:
        f.write(fits_file(cards, primary))
    with fits.open(path, mode="append") as hdul:
        hdul.append(ext1)
        hdul.append(ext2)
    read = []
    with fits.open(path) as hdul:
        # The extension's header holds the name on a CONTINUE card, as written by astropy.
        assert "CONTINUE" in hdul[1].header.tostring(), "no CONTINUE card"
        for hdu in hdul:
            h = hdu.header
            read.append({
                "extname": h.get("EXTNAME"),
                "bunit": h.get("BUNIT"),
                "object": h.get("OBJECT"),
                "object_comment": h.comments["OBJECT"] if "OBJECT" in h else None,
                "pixels": np.asarray(hdu.data, dtype=np.float64).ravel(),
            })
    # Card images astropy writes for string values of several lengths. (A value whose
    # doubled quote would straddle the 67th character is left out: astropy 8.0.2 then cuts
    # the pair in two, which its own reader accepts but the convention's quoting does not.)
    written = []
    for value in ["x" * 68, "x" * 69, "q" * 65 + "''" * 3,
                  "r" * 140, ("a 'quoted' word " * 9).rstrip()]:
        c = fits.Card("LONGKEY", value)
        images = [c.image[i:i + 80] for i in range(0, len(c.image), 80)]
        back = fits.Header.fromstring("".join(images))["LONGKEY"]
        assert back == value, (value, back)
        written.append({"value": value, "images": images})
    write_json(os.path.join(OUT, "long_strings.json"), {
        "source": f"astropy {astropy.__version__} astropy.io.fits",
        "hdus": read,
        "written": written,
    })


# The length units cairn reads in the comment of a wavelength keyword (src/map.rs,
# length_unit_m), as astropy.units spells them ('microns', also read by cairn, is not an
# astropy unit and is checked there against 'micron').
UNITS = ["m", "cm", "mm", "um", "nm", "Angstrom", "angstrom", "micron", "meter", "centimeter",
         "millimeter", "micrometer", "nanometer"]


def metres(value, unit):
    """value in unit as metres by astropy.units, or None when the unit is no length."""
    try:
        q = value * u.Unit(unit)
        return float(q.to(u.m).value)
    except (ValueError, u.UnitConversionError):
        return None


def in_range(m):
    return m if m is not None and 1e-6 <= m <= 10.0 else None


def wavelength_units():
    factors = {name: float(u.Unit(name).to(u.m)) for name in UNITS}
    cases = []

    def case(text, value, unit, why):
        cases.append({"card": card(text), "unit": unit, "why": why,
                      "metres": in_range(metres(value, unit))})

    # The review's cases: the unit in brackets, never matched inside a word.
    case("WAVELNTH=             850000.0 / [nm] effective wavelength", 850000.0, "nm",
         "nm in brackets")
    case("WAVELNTH=            8500000.0 / [Angstrom]", 8500000.0, "Angstrom",
         "Angstrom in brackets")
    case("WAVELNTH=              0.00085 / central wavelength of the spectrum [m]", 0.00085,
         "m", "m in brackets at the end; 'spectrum' holds no unit")
    case("WAVELNTH=                0.085 / [cm]", 0.085, "cm", "cm in brackets")
    case("WAVELEN =                850.0 / [um] wavelength", 850.0, "um", "um in brackets")
    case("WAVELEN =                  1.3 / [mm]", 1.3, "mm", "mm in brackets")
    case("WAVELEN =                850.0 / effective wavelength in micron", 850.0, "micron",
         "micron as a word")
    case("WAVELEN =                850.0 / [micrometer]", 850.0, "micrometer",
         "micrometer in brackets")
    # Capitals: a unit in capitals is read, in a comment all in capitals or not; a single
    # capital letter (an initial) is no metre.
    case("WAVELEN =                850.0 / WAVELENGTH IN MICRON", 850.0, "micron",
         "MICRON in a comment all in capitals")
    case("WAVELEN =                  1.1 / Wavelength in MM", 1.1, "mm",
         "MM in capitals in a comment of mixed case")
    case("WAVELNTH=                  1.1 / Wavelength, M. Smith, in mm", 1.1, "mm",
         "mm as a word; the initial M is no unit")
    case("WAVELEN =                850.0 / I'm told it is in um", 850.0, "um",
         "um as a word; the m of I'm is no unit")
    # Units that are no length, or no unit astropy knows: no wavelength.
    case("WAVELEN =                850.0 / [K]", 850.0, "K", "K is no length")
    case("WAVELEN =                850.0 / [furlongs]", 850.0, "furlongs", "not a unit")
    # Lengths outside 1 um to 10 m: not used.
    case("WAVELEN =                850.0 / [m]", 850.0, "m", "850 m is outside the range")
    case("WAVELNTH=                850.0 / [nm]", 850.0, "nm", "850 nm is outside the range")
    # Frequencies in Hz (FITS WCS Paper III), as wavelengths by astropy's spectral
    # equivalency; 230 (GHz written where Hz is asked) gives 1303 km, outside the range.
    for key, hz in [("RESTFRQ", 3.5297e11), ("RESTFREQ", 2.3e11), ("RESTFRQ", 230.0),
                    ("OBSFREQ", 1.0e15)]:
        m = float((hz * u.Hz).to(u.m, equivalencies=u.spectral()).value)
        cases.append({"card": card(f"{key:<8}= {hz!r:>20}"), "unit": "Hz",
                      "why": "a frequency in Hz", "metres": in_range(m)})
    write_json(os.path.join(OUT, "wavelength_units.json"), {
        "source": f"astropy {astropy.__version__} astropy.units",
        "metres_per_unit": factors,
        "cases": cases,
    })


def ctype_case():
    def header(ctype):
        h = fits.Header()
        for k, v in [("NAXIS", 2), ("NAXIS1", 60), ("NAXIS2", 40), ("CTYPE1", ctype[0]),
                     ("CTYPE2", ctype[1]), ("CRPIX1", 30.5), ("CRPIX2", 20.5),
                     ("CRVAL1", 83.8125), ("CRVAL2", -5.375), ("CDELT1", -0.002),
                     ("CDELT2", 0.002), ("RADESYS", "ICRS")]:
            h[k] = v
        return h

    out = {}
    for name, ctype in [("upper", ("RA---TAN", "DEC--TAN")), ("lower", ("ra---tan", "dec--tan"))]:
        h = header(ctype)
        entry = {"cards": [c.image for c in h.cards], "ctype": list(ctype)}
        try:
            w = WCS(h)
            xs = np.array([0.0, 29.5, 59.0, 10.0])
            ys = np.array([0.0, 19.5, 39.0, 30.0])
            lon, lat = w.wcs_pix2world(xs, ys, 0)
            entry.update({"astropy_reads": True, "x": xs, "y": ys, "lon": lon, "lat": lat})
        except Exception as e:  # astropy refuses it
            entry.update({"astropy_reads": False, "error": type(e).__name__})
        out[name] = entry
    assert out["upper"]["astropy_reads"] and not out["lower"]["astropy_reads"]
    write_json(os.path.join(OUT, "ctype_case.json"), {
        "source": f"astropy {astropy.__version__} astropy.wcs (WCSLIB), origin=0",
        **out,
    })


def ctype_pairs():
    """Whether astropy.wcs finds a celestial pair in two CTYPEs: bare coordinate names beside
    their partner (linear axes), beside an axis that is not their partner (no celestial pair:
    a position-velocity map), and a bare name beside a projected axis (refused)."""
    cases = []
    for c1, c2 in [("RA", "DEC"), ("GLON", "GLAT"), ("RA", "VRAD"), ("LINEAR", "GLAT"),
                   ("RA", "RA"), ("VELO-LSR", "DEC"), ("FREQ", "STOKES"),
                   ("RA---TAN", "DEC--TAN"), ("RA", "DEC--TAN"), ("RA", "RA---TAN"),
                   ("DEC", "GLAT-TAN")]:
        h = fits.Header()
        for k, v in [("NAXIS", 2), ("NAXIS1", 60), ("NAXIS2", 40), ("CTYPE1", c1),
                     ("CTYPE2", c2), ("CRPIX1", 30.5), ("CRPIX2", 20.5), ("CRVAL1", 83.8125),
                     ("CRVAL2", -5.375), ("CDELT1", -0.002), ("CDELT2", 0.002)]:
            h[k] = v
        entry = {"cards": [c.image for c in h.cards], "ctype": [c1, c2]}
        try:
            entry.update({"astropy_reads": True, "has_celestial": bool(WCS(h).has_celestial)})
        except Exception as e:  # astropy refuses it
            entry.update({"astropy_reads": False, "error": type(e).__name__})
        cases.append(entry)
    write_json(os.path.join(OUT, "ctype_pairs.json"), {
        "source": f"astropy {astropy.__version__} astropy.wcs (WCSLIB): WCS(header).has_celestial",
        "cases": cases,
    })


if __name__ == "__main__":
    long_strings()
    wavelength_units()
    ctype_case()
    ctype_pairs()

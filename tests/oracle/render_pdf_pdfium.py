"""The PDF back end's check figure as another PDF renderer draws it.

Source: pypdfium2 5.15.2 (Python bindings of PDFium, the PDF renderer of the Chromium
browser, bundled in the wheel) renders fixtures/render/check.pdf, made by cairn
(`cargo run --example make_render_fixture`), at the figure's own resolution (144 dpi: 2 pixels
per PDF point), and Pillow 13.0.0 writes the pixels as PNG. tests/render_checks.rs compares
them pixel by pixel with cairn's own PNG of the same figure (fixtures/render/check.png, drawn
by tiny-skia), and the page's size with the figure's print size.
"""
import os

import numpy as np
import pypdfium2 as pdfium
from PIL import Image

from common import fixtures_dir, out_dir, write_json

SRC = os.path.join(fixtures_dir(), "render")
OUT = out_dir("render")
DPI = 144.0

pdf = pdfium.PdfDocument(os.path.join(SRC, "check.pdf"))
page = pdf[0]
width_pt, height_pt = page.get_size()
bitmap = page.render(scale=DPI / 72.0)
rgb = np.asarray(bitmap.to_pil().convert("RGB"))
Image.fromarray(rgb).save(os.path.join(OUT, "check-pdfium.png"))
write_json(os.path.join(OUT, "check-pdfium.json"), {
    "pages": len(pdf),
    "width_pt": width_pt,
    "height_pt": height_pt,
    "rendered_width_px": rgb.shape[1],
    "rendered_height_px": rgb.shape[0],
    "dpi": DPI,
})

//! Writes the PDF back end's check figure (`cairn::render::pdf_check_figure`) as
//! `fixtures/render/check.png` and `fixtures/render/check.pdf`, the input of
//! `tests/oracle/render_pdf_pdfium.py`. Run after a deliberate change to the scene's back
//! ends, then re-run that oracle script: `cargo run --example make_render_fixture`.

fn main() {
    let (png, pdf) = cairn::render::pdf_check_figure().expect("the check figure draws");
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/render");
    std::fs::create_dir_all(&dir).expect("fixtures/render can be made");
    std::fs::write(dir.join("check.png"), png).expect("check.png written");
    std::fs::write(dir.join("check.pdf"), pdf).expect("check.pdf written");
    println!("wrote {}", dir.display());
}

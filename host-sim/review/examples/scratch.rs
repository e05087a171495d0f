use std::time::Instant;
fn main() {
    let dir = tempfile::tempdir().unwrap();
    let t = Instant::now();
    let (ponds, dumps) = holdback_review::demo::write_fleet(dir.path(), 3, 11, 2025, 100, 30, 256).unwrap();
    eprintln!("gen {:?}", t.elapsed());
    let pond_files: Vec<_> = ponds.iter().map(|p| dir.path().join("ponds").join(format!("{}.json", p.pond.info.pond_id))).collect();
    let t = Instant::now();
    let mut s = holdback_review::store::Store::open(&dir.path().join("a.sqlite").display().to_string()).unwrap();
    holdback_review::cli::import_tree(&mut s, &pond_files, &dumps, &Default::default()).unwrap();
    eprintln!("import {:?} {:?}", t.elapsed(), s.counts().unwrap());
}

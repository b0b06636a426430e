//! DIMACS `.gr` + `.co` files: the input is split at its first NUL byte
//! into the two files (written to a per-process folder in /dev/shm or the
//! temp dir, since the importer reads paths).
#![no_main]
use hodos::engine::import::dimacs;
use libfuzzer_sys::fuzz_target;
use std::path::PathBuf;
use std::sync::OnceLock;

fn dir() -> &'static PathBuf {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let base = if std::path::Path::new("/dev/shm").is_dir() {
            PathBuf::from("/dev/shm")
        } else {
            std::env::temp_dir()
        };
        let d = base.join(format!("hodos-fuzz-dimacs-{}", std::process::id()));
        std::fs::create_dir_all(&d).unwrap();
        d
    })
}

fuzz_target!(|data: &[u8]| {
    let cut = data.iter().position(|&b| b == 0).unwrap_or(data.len());
    let (gr, co) = (&data[..cut], data.get(cut + 1..).unwrap_or(&[]));
    let (p_gr, p_co) = (dir().join("g.gr"), dir().join("g.co"));
    std::fs::write(&p_gr, gr).unwrap();
    std::fs::write(&p_co, co).unwrap();
    let _ = dimacs::read(&p_gr, &p_co);
});

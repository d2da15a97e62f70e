use std::time::Instant;
fn main() {
    let path = std::env::args().nth(1).unwrap();
    let bytes = std::fs::read(&path).unwrap();
    let mb = bytes.len() as f64 / 1e6;
    let t = Instant::now();
    use sha2::Digest;
    let h = sha2::Sha256::digest(&bytes);
    println!(
        "sha256 {:.0} MB/s {:x}",
        mb / t.elapsed().as_secs_f64(),
        h[0]
    );
    let t = Instant::now();
    let ok = std::str::from_utf8(&bytes).is_ok();
    println!("utf8 {:.0} MB/s {ok}", mb / t.elapsed().as_secs_f64());
    let t = Instant::now();
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(false)
        .from_reader(&bytes[..]);
    let mut rec = csv::ByteRecord::new();
    let mut n = 0usize;
    while rdr.read_byte_record(&mut rec).unwrap() {
        n += rec.len();
    }
    println!(
        "csv only {:.0} MB/s fields {n}",
        mb / t.elapsed().as_secs_f64()
    );
    let t = Instant::now();
    let mut rdr = csv::ReaderBuilder::new()
        .has_headers(false)
        .from_reader(&bytes[..]);
    let mut s = 0.0;
    let mut first = true;
    while rdr.read_byte_record(&mut rec).unwrap() {
        if first {
            first = false;
            continue;
        }
        for f in rec.iter().skip(1) {
            s += std::str::from_utf8(f).unwrap().parse::<f64>().unwrap();
        }
    }
    println!("csv+parse {:.0} MB/s {s}", mb / t.elapsed().as_secs_f64());
    let t = Instant::now();
    let lot = lotshift::data::load_bytes(&path, &bytes, &Default::default()).unwrap();
    println!(
        "load_bytes {:.0} MB/s rows {}",
        mb / t.elapsed().as_secs_f64(),
        lot.len()
    );
    let t = Instant::now();
    let lot = lotshift::data::load(std::path::Path::new(&path), &Default::default()).unwrap();
    println!(
        "load file {:.0} MB/s rows {}",
        mb / t.elapsed().as_secs_f64(),
        lot.len()
    );
}
#[allow(dead_code)]
fn unused() {}

fn main() {
    let path = std::env::args().nth(1).unwrap();
    let bytes = std::fs::read(&path).unwrap();
    let lot = lotshift::data::load_bytes(&path, &bytes, &Default::default()).unwrap();
    println!("{}", lot.len());
}
